package web

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// haversine is the distance in metres on the sphere of the register's
// near searches (R = 6,371,008.8 m, store.MeanEarthRadiusM;
// docs/references.md#earth-radii), the one the map's script uses.
func haversine(lat1, lon1, lat2, lon2 float64) float64 {
	const R, rad = 6371008.8, math.Pi / 180
	dp, dl := (lat2-lat1)*rad, (lon2-lon1)*rad
	h := math.Sin(dp/2)*math.Sin(dp/2) + math.Cos(lat1*rad)*math.Cos(lat2*rad)*math.Sin(dl/2)*math.Sin(dl/2)
	return 2 * R * math.Asin(math.Min(1, math.Sqrt(h)))
}

// destination is the point at distance d metres from lat, lon on the
// bearing (degrees from north), on the same sphere (the direct problem on
// a sphere: Vincenty's spherical case, common practice).
func destination(lat, lon, bearing, d float64) (float64, float64) {
	const R, rad = 6371008.8, math.Pi / 180
	p1, l1, b, a := lat*rad, lon*rad, bearing*rad, d/R
	p2 := math.Asin(math.Sin(p1)*math.Cos(a) + math.Cos(p1)*math.Sin(a)*math.Cos(b))
	l2 := l1 + math.Atan2(math.Sin(b)*math.Sin(a)*math.Cos(p1), math.Cos(a)-math.Sin(p1)*math.Sin(p2))
	return p2 / rad, math.Remainder(l2/rad, 360)
}

// inBox says whether lat, lon is in the bbox "w,s,e,n" (west above east
// crosses the antimeridian, OGC API – Features /req/core/fc-bbox-response).
func inBox(t *testing.T, box string, lat, lon float64) bool {
	var v [4]float64
	for i, p := range strings.Split(box, ",") {
		var err error
		if v[i], err = strconv.ParseFloat(p, 64); err != nil {
			t.Fatal(err)
		}
	}
	w, s, e, n := v[0], v[1], v[2], v[3]
	if lat < s || lat > n {
		return false
	}
	if w <= e {
		return lon >= w && lon <= e
	}
	return lon >= w || lon <= e
}

// The box the map asks the items for holds the whole circle: the points
// at the radius on 16 bearings, on the sphere the map filters by, are in
// it, from the equator to near a pole and across the antimeridian; and it
// is not much larger than the circle (the items it brings are few more).
func TestBoxAround(t *testing.T) {
	for _, c := range []struct{ lat, lon, radius float64 }{
		{41.635, -97.95, 1200}, {0, 0, 100000}, {-33.9, 151.2, 5000}, {64.1, -21.9, 100000}, {85, 10, 50000},
		{0.5, 179.999, 2000}, {-12, -179.95, 20000},
	} {
		box := boxAround(c.lat, c.lon, c.radius)
		for b := 0.0; b < 360; b += 22.5 {
			lat, lon := destination(c.lat, c.lon, b, c.radius)
			if d := haversine(c.lat, c.lon, lat, lon); math.Abs(d-c.radius) > 1e-6*c.radius {
				t.Fatalf("destination: %v m, want %v", d, c.radius)
			}
			if !inBox(t, box, lat, lon) {
				t.Errorf("%v, %v r %v: box %s misses %.6f, %.6f (bearing %v)", c.lat, c.lon, c.radius, box, lat, lon, b)
			}
		}
		// The corner of the box northwards is within 1.2 radii north of the
		// point: the box is the circle's, not the world's.
		if lat, lon := destination(c.lat, c.lon, 0, 1.2*c.radius); c.lat < 80 && inBox(t, box, lat, lon) {
			t.Errorf("%v, %v r %v: box %s holds a point 1.2 radii north", c.lat, c.lon, c.radius, box)
		}
	}
	if box := boxAround(0.5, 179.999, 2000); !strings.HasPrefix(box, "179.") || !strings.Contains(box, ",-179.") {
		t.Errorf("across the antimeridian: %s, want west 179.x and east -179.x", box)
	}
	if box := boxAround(89.99, 0, 5000); !strings.HasPrefix(box, "-180.000000,") || !strings.HasSuffix(box, ",90.000000") {
		t.Errorf("near the pole: %s, want every longitude up to 90", box)
	}
}

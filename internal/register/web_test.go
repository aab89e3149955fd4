package register_test

import (
	"errors"
	"fmt"
	"testing"

	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// The public site's reads: a search stops at its limit and says more were
// found; a page of marks by designation follows on from the last one; a
// box upside down or off the globe is refused naming bbox; an unknown
// name is a MarkNotFoundError.
func TestPublicReads(t *testing.T) {
	t.Parallel()
	b := registertest.Setup(t)
	for i := 0; i < 5; i++ {
		b.Mark(t, registertest.MarkOpts{Designation: fmt.Sprintf("TC-%04d", 500+i)})
	}
	near := &store.LatLon{Lat: 41.62, Lon: -97.95}
	res, err := b.Reg.Search(b.Ctx, register.SearchParams{Near: near, RadiusM: 100000, Limit: 2})
	if err != nil || len(res.Features) != 2 || !res.More || res.Features[0].Designation != "TC-0500" {
		t.Fatalf("search limited to 2: %v, %d, more %v", err, len(res.Features), res.More)
	}
	res, err = b.Reg.Search(b.Ctx, register.SearchParams{Near: near, RadiusM: 100000, Limit: 5})
	if err != nil || len(res.Features) != 5 || res.More {
		t.Errorf("search of all 5: %v, %d, more %v", err, len(res.Features), res.More)
	}
	pg, err := b.Reg.Features(b.Ctx, register.FeaturesParams{After: "TC-0502", Limit: 10})
	if err != nil || len(pg.Features) != 2 || pg.Features[0].Designation != "TC-0503" || pg.More || pg.State.Head == "" {
		t.Errorf("the page after TC-0502: %v %+v", err, pg)
	}
	for _, bb := range []store.BBox{{West: -98, South: 42, East: -97, North: 41}, {West: -98, South: -91, East: -97, North: 41}, {West: -181, South: 41, East: -97, North: 42}} {
		var ie *register.InputError
		if _, err := b.Reg.Features(b.Ctx, register.FeaturesParams{BBox: &bb, Limit: 10}); !errors.As(err, &ie) || ie.Field != "bbox" {
			t.Errorf("box %+v: %v", bb, err)
		}
	}
	var nf *register.MarkNotFoundError
	if _, _, err := b.Reg.FeatureOne(b.Ctx, "TC-9999", nil); !errors.As(err, &nf) {
		t.Errorf("an unknown mark: %v", err)
	}
	if _, err := b.Reg.MarkPage(b.Ctx, " ", nil); !errors.As(err, &nf) {
		t.Errorf("an empty name: %v", err)
	}
}

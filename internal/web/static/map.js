// cairn serve: the map of marks (/map). The page gives everything this
// script needs in data- attributes of #map (no inline script: the site's
// Content-Security-Policy allows its own script files only). The marks
// come from the site's OGC API items (GeoJSON, RFC 7946) within the box
// around the point; the register's text goes into the popups as text
// (textContent), never as markup.
(function () {
  "use strict";
  var el = document.getElementById("map");
  if (!el || typeof L === "undefined") {
    return;
  }
  var d = el.dataset;
  var form = document.getElementById("point");
  var latIn = document.getElementById("lat");
  var lonIn = document.getElementById("lon");
  var radIn = document.getElementById("radius_m");
  var status = document.getElementById("map-status");
  var asOf = d.asOf || "";
  var maxMarks = parseInt(d.maxMarks || "2000", 10);

  // The characters a page writes \uXXXX rather than as they are, the
  // same rule as the server's pages (internal/web/visible.go): C0 but
  // tab and line breaks, DEL and C1, the bidirectional marks,
  // embeddings, overrides and isolates, the line and paragraph
  // separators.
  var hidden = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f-\u009f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069\u2028\u2029]/g;
  function visible(s) {
    return String(s == null ? "" : s).replace(hidden, function (c) {
      return "\\u" + ("000" + c.charCodeAt(0).toString(16)).slice(-4);
    });
  }

  // distance is the haversine distance in metres on the sphere of the
  // register's near searches (store.MeanEarthRadiusM, GRS 80's mean
  // radius; docs/references.md#earth-radii), so that the map draws the
  // marks the list finds.
  var R = 6371008.8;
  function distance(lat1, lon1, lat2, lon2) {
    var rad = Math.PI / 180;
    var dp = (lat2 - lat1) * rad, dl = (lon2 - lon1) * rad;
    var h = Math.sin(dp / 2) * Math.sin(dp / 2) +
      Math.cos(lat1 * rad) * Math.cos(lat2 * rad) * Math.sin(dl / 2) * Math.sin(dl / 2);
    return 2 * R * Math.asin(Math.min(1, Math.sqrt(h)));
  }

  function say(text) {
    if (status) {
      status.textContent = text;
    }
  }

  // add appends an element of tag holding text (as text) to parent.
  function add(parent, tag, text, cls) {
    var e = document.createElement(tag);
    if (text != null) {
      e.textContent = visible(text);
    }
    if (cls) {
      e.className = cls;
    }
    parent.appendChild(e);
    return e;
  }

  function markURL(designation) {
    return "/marks/" + encodeURIComponent(designation) + (asOf ? "?as_of=" + encodeURIComponent(asOf) : "");
  }

  // popup is a mark's popup: its designation (a link to its page), the
  // doubts in capitals, its condition, its heights in force and its
  // description, every piece of text from the register as text.
  function popup(f) {
    var p = f.properties || {};
    var box = document.createElement("div");
    box.className = "popup";
    var h = add(box, "p", null, "popup-mark");
    var a = add(h, "a", p.mark || f.id);
    a.href = markURL(p.mark || f.id);
    (p.doubts || []).forEach(function (dt) {
      var w = add(box, "p", null, "popup-doubt");
      add(w, "strong", String(dt.word || "").toUpperCase().replace(/-/g, " "));
      w.appendChild(document.createTextNode(" " + visible(dt.warning)));
    });
    add(box, "p", "Condition: " + (p.condition || "no report yet") +
      (p.condition_observed_on ? " (" + p.condition_observed_on + ")" : ""));
    var hs = p.heights || [];
    if (hs.length === 0) {
      add(box, "p", "No height in force.", "none");
    }
    hs.forEach(function (ht) {
      add(box, "p", ht.datum + ": " + (ht.withdrawn ? "withdrawn" : ht.height_in_unit + " " + ht.unit) + " (v" + ht.version + ")", "popup-height");
    });
    if (p.description) {
      add(box, "p", p.description, "text popup-description");
    }
    add(box, "p", "Review by a licensed surveyor; check into two marks; verify the mark's condition; local codes govern.", "fine");
    return box;
  }

  var map = L.map(el, { attributionControl: !!d.tiles });
  if (d.tiles) {
    L.tileLayer(d.tiles, { maxZoom: 19 }).addTo(map);
  }
  var marks = L.layerGroup().addTo(map);
  var centre = null;
  var circle = null;
  var count = 0;
  var cut = false; // more marks within the radius than maxMarks

  function setPoint(lat, lon, radius) {
    if (circle) {
      map.removeLayer(circle);
    }
    if (centre) {
      map.removeLayer(centre);
    }
    circle = L.circle([lat, lon], { radius: radius, interactive: false, className: "search-circle" }).addTo(map);
    centre = L.circleMarker([lat, lon], { radius: 4, interactive: false, className: "search-point" }).addTo(map);
  }

  // load reads one page of items and then its next page, until there is
  // none or maxMarks are shown; only marks within the radius are drawn
  // (the box holds the circle).
  function load(url, lat, lon, radius) {
    fetch(url, { headers: { Accept: "application/geo+json" }, credentials: "omit" })
      .then(function (r) {
        if (!r.ok) {
          throw new Error("the register answered " + r.status);
        }
        return r.json();
      })
      .then(function (fc) {
        (fc.features || []).forEach(function (f) {
          if (!f.geometry || f.geometry.type !== "Point") {
            return;
          }
          var ll = L.latLng(f.geometry.coordinates[1], f.geometry.coordinates[0]);
          if (distance(lat, lon, ll.lat, ll.lng) > radius) {
            return;
          }
          if (count >= maxMarks) {
            cut = true;
            return;
          }
          var m = L.marker(ll, { title: visible(f.id), alt: visible(f.id), keyboard: true });
          m.bindPopup(popup(f));
          m.addTo(marks);
          count++;
        });
        var next = (fc.links || []).filter(function (l) { return l.rel === "next"; })[0];
        if (next && !cut) {
          load(next.href, lat, lon, radius);
          return;
        }
        say(count + (count === 1 ? " mark" : " marks") + " within " + radius + " m of " + lat + ", " + lon +
          (cut ? " (only the first " + maxMarks + " by designation: narrow the search)" : "") + ".");
        el.dataset.loaded = String(count);
      })
      .catch(function (err) {
        say("The marks could not be loaded: " + err.message + ". The list of marks near the point works without the map.");
        el.dataset.loaded = "error";
      });
  }

  if (d.lat && d.lon && d.radius && d.items) {
    var lat = parseFloat(d.lat), lon = parseFloat(d.lon), radius = parseFloat(d.radius);
    // The view first: a layer is drawn once the map has one.
    map.fitBounds(L.latLng(lat, lon).toBounds(2 * radius), { padding: [20, 20] });
    setPoint(lat, lon, radius);
    say("Loading the marks…");
    load(d.items, lat, lon, radius);
  } else {
    map.setView([20, 0], 2);
    say("Click the map, or type a point, to find the marks near it.");
    el.dataset.loaded = "0";
  }

  // A click on the map fills the point search; the form is sent by its
  // button, as without the map.
  map.on("click", function (e) {
    var ll = e.latlng.wrap();
    if (latIn && lonIn) {
      latIn.value = ll.lat.toFixed(6);
      lonIn.value = ll.lng.toFixed(6);
    }
    setPoint(ll.lat, ll.lng, parseFloat(radIn && radIn.value) || 1000);
    say("Point " + ll.lat.toFixed(6) + ", " + ll.lng.toFixed(6) + " chosen: show the marks near it with the button.");
    if (form) {
      form.classList.add("chosen");
    }
  });
})();

/* Drawing the site on the job form (our own small drawing code on the vendored Leaflet; background,
   scale bar and graticule from mapkit.js). Click or tap the map to add a corner of the outline (or to
   place the point), drag a corner to move it, undo the last corner, clear. Every change writes the
   drawing as GeoJSON (longitude, latitude; RFC 7946) into the form's site field (#id_site_geojson),
   which the form and the job service check as they check pasted GeoJSON. Editing that field by hand
   redraws the map. Without this script (or Leaflet) the drawing panel stays hidden and the form works
   as before. No inline code (strict CSP): the first view comes from the JSON block #sitedraw-data. */
(function () {
  "use strict";
  var panel = document.getElementById("sitedraw");
  var field = document.getElementById("id_site_geojson");
  var dataEl = document.getElementById("sitedraw-data");
  if (!panel || !field || !dataEl || !window.L || !window.RegistryMapKit) { return; }
  var data = JSON.parse(dataEl.textContent);
  var status = document.getElementById("sitedraw-status");
  panel.hidden = false;

  var kit = window.RegistryMapKit.create(document.getElementById("sitedraw-map"), data, { maxZoom: 19 });
  var map = kit.map;
  var kind = "polygon";
  var corners = [];           // L.LatLng, in drawing order
  var kept = { polygon: [], point: [] };
  var handles = L.layerGroup().addTo(map);
  var shape = null;

  function round8(v) { return Math.round(v * 1e8) / 1e8; }
  function lonLat(ll, withHeight) {
    var c = [round8(L.Util.wrapNum(ll.lng, [-180, 180], true)), round8(ll.lat)];
    if (withHeight) { c.push(ll.alt); }
    return c;
  }
  // A site read from the field may carry ellipsoidal heights (third coordinates): they are kept while
  // every corner still has its own; a new or moved corner has none, and then none are written.
  var hadHeights = false;
  function allHeights() {
    return corners.length > 0 && corners.every(function (ll) { return typeof ll.alt === "number"; });
  }

  function geojson() {
    var h = allHeights();
    if (kind === "point") {
      return corners.length ? { type: "Point", coordinates: lonLat(corners[0], h) } : null;
    }
    if (corners.length < 3) { return null; }
    var ring = corners.map(function (ll) { return lonLat(ll, h); });
    ring.push(ring[0].slice());
    return { type: "Polygon", coordinates: [ring] };
  }

  function say() {
    var n = corners.length, words;
    if (kind === "point") {
      words = n ? "Site point placed; drag it to move it, or click elsewhere to move it there." :
        "Click or tap the map to place the site point.";
    } else if (n === 0) {
      words = "Click or tap the map to place the first corner of the site outline.";
    } else if (n < 3) {
      words = n + " corner" + (n === 1 ? "" : "s") + " placed: at least 3 make an outline.";
    } else {
      words = "Outline of " + n + " corners written into the GeoJSON box; add more, drag one, or undo.";
    }
    if (hadHeights && corners.length && !allHeights()) {
      words += " The site's heights are left out (a new or moved corner has none): type them into the GeoJSON box if the job needs them.";
    }
    status.textContent = words;
  }

  // Write the drawing into the site field (an empty drawing empties it) and tell the form it changed.
  function write() {
    var g = geojson();
    field.value = g ? JSON.stringify(g) : "";
    field.dispatchEvent(new Event("input", { bubbles: true }));
  }

  function redraw() {
    handles.clearLayers();
    if (shape) { map.removeLayer(shape); shape = null; }
    if (kind === "polygon" && corners.length >= 2) {
      shape = (corners.length >= 3 ? L.polygon(corners, { color: "#1d1f21", weight: 2, fillColor: "#5f9e8f",
        fillOpacity: 0.25, interactive: false }) : L.polyline(corners, { color: "#1d1f21", weight: 2,
        dashArray: "4 4", interactive: false })).addTo(map);
    }
    corners.forEach(function (ll, i) {
      var label = kind === "point" ? "Site point" : "Corner " + (i + 1);
      var h = L.marker(ll, { draggable: true, title: label + " (drag to move)", alt: label, keyboard: true,
        icon: L.divIcon({ className: "sd-handle" + (kind === "point" ? " sd-point" : ""), iconSize: [18, 18],
          iconAnchor: [9, 9] }) });
      h.on("drag", function (e) { corners[i] = e.target.getLatLng(); if (shape) { shape.setLatLngs(corners); } });
      h.on("dragend", function () { write(); say(); });
      handles.addLayer(h);
    });
    say();
  }

  function change() { write(); redraw(); }

  map.on("click", function (e) {
    if (kind === "point") { corners = [e.latlng]; } else { corners.push(e.latlng); }
    change();
  });

  Array.prototype.forEach.call(panel.querySelectorAll("button[data-kind]"), function (b) {
    b.addEventListener("click", function () {
      if (kind === b.getAttribute("data-kind")) { return; }
      kept[kind] = corners;  // each kind keeps its own drawing: switching back brings it back
      kind = b.getAttribute("data-kind");
      corners = kept[kind];
      Array.prototype.forEach.call(panel.querySelectorAll("button[data-kind]"), function (o) {
        o.setAttribute("aria-pressed", String(o === b));
      });
      change();
    });
  });
  panel.querySelector("button[data-action='undo']").addEventListener("click", function () {
    corners.pop(); change();
  });
  panel.querySelector("button[data-action='clear']").addEventListener("click", function () {
    corners = []; change();
  });

  // The field's own content (a job being edited, or GeoJSON pasted by hand) is drawn when it is a
  // Point or a Polygon without holes; anything else is left to the form to check.
  function readField() {
    var g;
    try { g = JSON.parse(field.value); } catch (err) { return false; }
    if (g && g.type === "Feature") { g = g.geometry; }
    if (!g) { return false; }
    if (g.type === "Point" && g.coordinates && g.coordinates.length >= 2) {
      kind = "point"; corners = [L.latLng(g.coordinates[1], g.coordinates[0], g.coordinates[2])];
    } else if (g.type === "Polygon" && g.coordinates && g.coordinates.length === 1 && g.coordinates[0].length >= 4) {
      kind = "polygon";
      corners = g.coordinates[0].slice(0, -1).map(function (c) { return L.latLng(c[1], c[0], c[2]); });
    } else {
      return false;
    }
    hadHeights = allHeights();
    Array.prototype.forEach.call(panel.querySelectorAll("button[data-kind]"), function (o) {
      o.setAttribute("aria-pressed", String(o.getAttribute("data-kind") === kind));
    });
    return true;
  }
  field.addEventListener("change", function () { if (readField()) { fit(); redraw(); } });

  function fit() {
    if (corners.length === 1) { map.setView(corners[0], Math.max(map.getZoom() || 0, 15)); }
    else { map.fitBounds(L.latLngBounds(corners), { padding: [30, 30], maxZoom: 17 }); }
  }
  // The registry's usable marks around the view (the nearby API, usable_only), redrawn as the map moves:
  // small green dots with the code on hover; a click on one places a corner as anywhere else (the
  // click goes on to the map). For orientation only: coordinates for work come from the mark page.
  var marksLayer = L.layerGroup().addTo(map);
  var marksNote = document.getElementById("sitedraw-marks");
  var asked = "";
  var timer = null;
  function showMarks() {
    if (!data.marks_url || !window.fetch) { return; }
    var c = map.getCenter();
    var edge = map.getBounds().getNorthEast();
    var radius = Math.max(0.1, Math.min(c.distanceTo(edge) / 1000, data.marks_radius_max_km));
    var query = "lat=" + c.lat.toFixed(6) + "&lon=" + L.Util.wrapNum(c.lng, [-180, 180], true).toFixed(6) +
      "&radius_km=" + radius.toFixed(3) + "&limit=" + data.marks_limit + "&usable_only=true";
    if (query === asked) { return; }
    asked = query;
    fetch(data.marks_url + "?" + query, { credentials: "same-origin", headers: { Accept: "application/json" } })
      .then(function (r) { return r.ok ? r.json() : null; })
      .then(function (body) {
        if (!body || query !== asked) { return; }  // a later view's answer wins
        marksLayer.clearLayers();
        body.marks.forEach(function (m) {
          L.circleMarker([m.lat_deg, m.lon_deg], { radius: 5, color: "#ffffff", weight: 1.5, fillColor: "#2f5d34",
            fillOpacity: 1, className: "sd-mark", bubblingMouseEvents: true })
            .bindTooltip(m.code + " (usable registry mark)", { direction: "top", offset: [0, -6] })
            .addTo(marksLayer);
        });
        if (marksNote) {
          marksNote.textContent = body.count ?
            body.count + " usable registry mark" + (body.count === 1 ? "" : "s") + " shown around the view" +
              (body.count >= data.marks_limit ? " (the nearest " + data.marks_limit + ")" : "") +
              ": green dots, for orientation; take coordinates for work from the mark page." :
            "No usable registry mark around this view.";
        }
      })
      .catch(function () { /* the drawing works without them */ });
  }
  map.on("moveend", function () {
    if (timer) { clearTimeout(timer); }
    timer = setTimeout(showMarks, 250);
  });

  if (field.value.trim() && readField()) {
    fit();  // the view first: markers need one
    redraw();
  } else if (data.extent) {
    map.fitBounds(data.extent, { padding: [20, 20], maxZoom: 15 });
    redraw();
  } else {
    map.setView([0, 0], 2);
    redraw();
  }
  kit.drawGraticule();
  showMarks();
})();

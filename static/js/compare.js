// Compare page: the section line drawn on the site map (static/js/sitemap.js). Two clicks set
// its ends (a third starts again); the ends fill the form, which asks the server for the
// section figure. Typing the ends and pressing the button does the same without the map.
(function () {
  "use strict";

  var current = null; // {handle, layer, ends: [LatLng]}

  var readJson = window.Probewise.readJson;

  function drawLine(points) {
    current.layer.clearLayers();
    points.forEach(function (p, i) {
      L.circleMarker(p, { radius: 5, className: "section-end", interactive: false })
        .bindTooltip(i === 0 ? "Start" : "End", { permanent: true, direction: "top", className: "pw-map-tip" })
        .addTo(current.layer);
    });
    if (points.length === 2) {
      L.polyline(points, { className: "section-line", interactive: false }).addTo(current.layer);
    }
  }

  function showSection(section) {
    if (!current || !section) return;
    current.ends = [];
    drawLine([
      current.handle.toLatLng(parseFloat(section.x1), parseFloat(section.y1)),
      current.handle.toLatLng(parseFloat(section.x2), parseFloat(section.y2)),
    ]);
  }

  function setInput(id, value) {
    var input = document.getElementById(id);
    if (input) input.value = value.toFixed(1);
  }

  function onClick(point, event) {
    if (current.ends.length !== 1) {
      current.ends = [event.latlng];
      drawLine(current.ends);
      return;
    }
    current.ends.push(event.latlng);
    drawLine(current.ends);
    var a = current.handle.toProject(current.ends[0]);
    setInput("section-x1", a.x);
    setInput("section-y1", a.y);
    setInput("section-x2", point.x);
    setInput("section-y2", point.y);
    var form = document.getElementById("section-form");
    if (form && typeof htmx !== "undefined") htmx.trigger(form, "submit");
  }

  document.addEventListener("probewise:map-ready", function (event) {
    if (!event.target || !event.target.classList.contains("compare-map")) return;
    var handle = event.detail;
    var probes = readJson("compare-probes-data") || { probes: [] };
    handle.addProbes(probes.probes, { planned: true }).addTo(handle.map);
    current = { handle: handle, layer: L.layerGroup().addTo(handle.map), ends: [] };
    handle.onClick(onClick);
    showSection(probes.section);
  });

  // A new section figure (typed ends, or an error): draw the line it was made for.
  document.addEventListener("htmx:load", function (event) {
    if (!current || !event.target || event.target.id !== "section-figure") return;
    try {
      showSection(JSON.parse(event.target.getAttribute("data-section")));
    } catch (e) {
      /* a refused section keeps the line drawn */
    }
  });
})();

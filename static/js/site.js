// Site and Design elements pages: a click on the map adds the point under the pointer to the coordinates field
// last used (an outline, zone, area or exclusion being edited), rounded to 0.1 m.
(function () {
  "use strict";

  var lastField = null;

  document.addEventListener("focusin", function (event) {
    var el = event.target;
    if (el && el.matches && el.matches("textarea[name='geometry_text']")) lastField = el;
  });

  function usable(field) {
    if (!field || !field.isConnected || field.disabled) return false;
    var details = field.closest("details");
    return !details || details.open;
  }

  function attach(handle) {
    var key = handle && handle.element.getAttribute("data-map-key");
    if (key !== "site-map" && key !== "elements-map") return;
    handle.onClick(function (point) {
      if (!usable(lastField)) return;
      var line = ProbewiseMap.formatNumber(point.x, 1) + ", " + ProbewiseMap.formatNumber(point.y, 1);
      var text = lastField.value.replace(/\s+$/, "");
      lastField.value = (text ? text + "\n" : "") + line;
      lastField.dispatchEvent(new Event("input", { bubbles: true }));
      var status = document.getElementById(key + "-status");
      if (status) {
        var label = document.querySelector("label[for='" + lastField.id + "']");
        status.textContent = "Added " + line + " to " + (label ? label.textContent.trim() : "the coordinates") + ".";
      }
    });
  }

  document.addEventListener("probewise:map-ready", function (event) { attach(event.detail); });
  if (window.ProbewiseMap) {
    attach(ProbewiseMap.get(document.querySelector("[data-map-key='site-map']")));
    attach(ProbewiseMap.get(document.querySelector("[data-map-key='elements-map']")));
  }
})();

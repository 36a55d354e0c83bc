// probewise page behaviour. Scripts are files (the Content-Security-Policy forbids inline ones).
(function () {
  "use strict";

  function setFlash(kind, text) {
    var flash = document.getElementById("flash");
    if (!flash) return;
    flash.textContent = text;
    flash.className = kind ? "flash flash-" + kind : "flash";
    flash.setAttribute("role", kind === "error" ? "alert" : "status");
  }

  // The JSON data island with this id (a hidden element: htmx drops swapped <script>s).
  function readJson(id) {
    var el = document.getElementById(id);
    if (!el) return null;
    try {
      return JSON.parse(el.textContent);
    } catch (e) {
      return null;
    }
  }

  // Shared with the page scripts (loaded after this one: deferred scripts run in order).
  window.Probewise = { setFlash: setFlash, readJson: readJson };

  // A new action clears the message left by the previous one.
  document.addEventListener("htmx:beforeRequest", function () {
    setFlash("", "");
  });

  document.addEventListener("click", function (event) {
    if (event.target && event.target.id === "flash") setFlash("", "");
  });

  // No answer at all: the server was stopped or the connection dropped.
  document.addEventListener("htmx:sendError", function () {
    setFlash("error", "The server did not answer. Is probewise serve still running?");
  });
})();

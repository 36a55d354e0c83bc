// Schedule page: the print button (the Content-Security-Policy forbids inline handlers).
(function () {
  "use strict";
  document.addEventListener("click", function (event) {
    if (event.target && event.target.id === "print-schedule") window.print();
  });
})();

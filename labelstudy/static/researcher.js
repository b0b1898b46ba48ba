// Researcher pages, optional enhancement: a click on a judge's link field selects the whole link for
// copying. Every page works without this script.
(function () {
  "use strict";
  document.addEventListener("focusin", function (ev) {
    var el = ev.target;
    if (el && el.matches && el.matches("input.link")) {
      el.select();
    }
  });
})();

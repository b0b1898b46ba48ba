// Researcher pages, optional enhancements (every page works without this script):
// - a click on a judge's link field selects the whole link for copying;
// - on a round page, while judges are typed into the add-judges box, the panel plan is updated for the
//   panel that would result (the same sentences the plan page shows, fetched as JSON).
(function () {
  "use strict";
  document.addEventListener("focusin", function (ev) {
    var el = ev.target;
    if (el && el.matches && el.matches("input.link")) {
      el.select();
    }
  });

  var plan = document.getElementById("plan");
  var box = document.getElementById("judges-text");
  if (plan && box && window.fetch) {
    var active = parseInt(plan.getAttribute("data-active"), 10) || 0;
    var list = document.getElementById("plan-messages");
    var label = document.getElementById("plan-for");
    var timer = null, asked = null;
    var update = function () {
      var typed = box.value.split(/\r?\n/).filter(function (l) { return l.trim() !== ""; }).length;
      var n = active + typed;
      if (n === asked) { return; }
      asked = n;
      if (n < 2) {
        label.textContent = "With fewer than two judges no agreement can be estimated.";
        return;
      }
      fetch(plan.getAttribute("data-plan-url") + "&judges=" + n, { credentials: "same-origin",
                                                                  headers: { "Accept": "application/json" } })
        .then(function (r) { return r.json(); })
        .then(function (b) {
          if (asked !== n || !b.ok) { return; }
          list.textContent = "";
          b.messages.forEach(function (m) {
            var li = document.createElement("li");
            li.textContent = m;
            list.appendChild(li);
          });
          label.textContent = typed ? ("For a panel of " + n + " judges: the " + active + " on it now and the " +
                                       typed + " typed above.") : ("For the " + n + " active judges on the panel now.");
        })
        .catch(function () { /* the plan page still works without this */ });
    };
    box.addEventListener("input", function () {
      if (timer) { window.clearTimeout(timer); }
      timer = window.setTimeout(update, 600);
    });
  }
})();

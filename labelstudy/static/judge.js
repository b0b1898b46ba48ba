/* labelstudy judge form: save every answer as soon as it is given, never lose one.
 *
 * The page works without this file (a plain form with "Save and continue"). With it:
 * - each change is POSTed to data-save-url as JSON with the header X-CSRF-Token and
 *   revision = last known revision + 1 (one request in flight per question; later changes wait);
 * - a local copy lives in localStorage ("labelstudy:<link>:<task>:<key>") until the server acknowledges it;
 * - network failures and 5xx are retried with backoff; 409 means the server's answer wins;
 * - on load (and when the tab comes back into view) data-state-url is fetched and reconciled:
 *   server answers win when their revision is >= the local copy's; newer local copies are re-sent;
 * - each question shows its state as plain text; screen readers hear one settled message per save
 *   ("Saved. 12 of 40 answered.", or once that an answer is kept on this device) through the single polite
 *   live region #save-live, never the intermediate "Saving…";
 * - open sort: a named pile shows its name in every statement's list, and a used pile without a name says so.
 */
(function () {
  "use strict";
  var form = document.getElementById("task-form");
  if (!form || !window.fetch || !window.JSON) { return; }
  if (form.getAttribute("data-readonly") === "1") { return; }
  document.documentElement.classList.add("js");

  var cfg = {
    token: form.getAttribute("data-token"),
    csrf: form.getAttribute("data-csrf"),
    taskId: parseInt(form.getAttribute("data-task-id"), 10),
    saveUrl: form.getAttribute("data-save-url"),
    stateUrl: form.getAttribute("data-state-url")
  };
  var PREFIX = "labelstudy:" + cfg.token + ":";
  var LS = PREFIX + cfg.taskId + ":";
  var MAX_DELAY = 30000;
  var units = {};
  var lastAnswerAt = Date.now();
  var summary = document.getElementById("save-summary");
  var live = document.getElementById("save-live");
  var announceTimer = null;

  Array.prototype.forEach.call(form.querySelectorAll("[data-key]"), function (el) {
    var key = el.getAttribute("data-key");
    units[key] = { key: key, el: el, rev: parseInt(el.getAttribute("data-rev") || "0", 10) || 0,
                   pending: null, sending: false, delay: 1000, timer: null, debounce: null };
  });

  /* ---------------------------------------------------------------- storage */
  function lsGet(name) {
    try { var s = window.localStorage.getItem(name); return s ? JSON.parse(s) : null; } catch (e) { return null; }
  }
  function lsSet(name, obj) { try { window.localStorage.setItem(name, JSON.stringify(obj)); } catch (e) { /* full or blocked */ } }
  function lsDel(name) { try { window.localStorage.removeItem(name); } catch (e) { /* blocked */ } }

  /* ---------------------------------------------------------------- fields */
  function field(name) { return form.elements.namedItem(name); }
  function radios(f) {
    if (!f) { return null; }
    if (typeof RadioNodeList !== "undefined" && f instanceof RadioNodeList) { return Array.prototype.slice.call(f); }
    if (f.type === "radio") { return [f]; }
    return null;
  }
  function getValue(key) {
    var f = field("v__" + key), list = radios(f), v = null;
    if (!f) { return null; }
    if (list) {
      list.forEach(function (r) { if (r.checked) { v = r.value; } });
      return v;
    }
    v = (f.value || "").trim();
    return v === "" ? null : v;
  }
  function setValue(key, value) {
    var f = field("v__" + key), list = radios(f);
    if (!f) { return; }
    if (list) {
      list.forEach(function (r) { r.checked = (value !== null && r.value === value); });
    } else {
      f.value = value === null || value === undefined ? "" : value;
    }
  }
  function getComment(key) { var f = field("c__" + key); return f ? (f.value || "").trim() : ""; }
  function setComment(key, text) {
    var f = field("c__" + key);
    if (!f) { return; }
    f.value = text || "";
    if (text) { var d = f.closest("details"); if (d) { d.open = true; } }
  }
  function setRev(u) { var f = field("rev__" + u.key); if (f) { f.value = String(u.rev); } }
  function keyOf(target) {
    var n = (target && target.name) || "";
    if (n.indexOf("v__") === 0 || n.indexOf("c__") === 0) { return n.slice(3); }
    return null;
  }

  /* ---------------------------------------------------------------- state display */
  function show(u, text, kind) {
    var s = document.getElementById(u.el.id + "-state");
    if (!s) { return; }
    if (s.textContent !== text) { s.textContent = text; }
    s.className = "save-state is-" + kind;
    updateSummary();
  }
  /* One polite message at a time; emptied first so the same words (e.g. re-answering) are spoken again. */
  function announce(text) {
    if (!live) { return; }
    if (announceTimer) { window.clearTimeout(announceTimer); }
    live.textContent = "";
    announceTimer = window.setTimeout(function () { announceTimer = null; live.textContent = text; }, 150);
  }
  function progressWords(p) {
    return p ? " " + p.answered + " of " + p.required + " answered." : "";
  }
  function updateSummary() {
    if (!summary) { return; }
    var waiting = 0;
    Object.keys(units).forEach(function (k) { if (units[k].pending) { waiting += 1; } });
    summary.textContent = waiting ? (waiting + (waiting === 1 ? " answer is" : " answers are") +
      " waiting to be saved; they are kept on this device meanwhile.") : "";
  }
  function updateProgress(p) {
    if (!p) { return; }
    var c = document.getElementById("progress-count"), t = document.getElementById("progress-total"),
        bar = document.getElementById("progress-bar");
    if (c) { c.textContent = String(p.answered); }
    if (t) { t.textContent = String(p.required); }
    if (bar) { bar.max = Math.max(p.required, 1); bar.value = p.answered; }
  }
  function updatePileCounts() {
    var counts = {};
    Object.keys(units).forEach(function (k) {
      if (k.indexOf("pile:") === 0) { return; }
      var f = field("v__" + k);
      if (f && f.tagName === "SELECT" && f.value) { counts[f.value] = (counts[f.value] || 0) + 1; }
    });
    Array.prototype.forEach.call(form.querySelectorAll(".pile-count"), function (s) {
      s.textContent = "(" + (counts[s.getAttribute("data-pile")] || 0) + ")";
    });
    Array.prototype.forEach.call(form.querySelectorAll(".pile-hint"), function (h) {
      var n = h.getAttribute("data-pile"), box = field("v__pile:" + n);
      var text = (counts[n] && box && !(box.value || "").trim()) ? "This pile needs a name." : "";
      if (h.textContent !== text) { h.textContent = text; }
    });
  }
  function updatePileNames() {
    Array.prototype.forEach.call(form.querySelectorAll("select[name^='v__']"), function (sel) {
      Array.prototype.forEach.call(sel.options, function (o) {
        if (!o.value) { return; }
        var box = field("v__pile:" + o.value), name = box ? (box.value || "").trim() : "";
        var text = "Pile " + o.value + (name ? ": " + name : "");
        if (o.textContent !== text) { o.textContent = text; }
      });
    });
  }

  /* ---------------------------------------------------------------- saving */
  function post(body) {
    return fetch(cfg.saveUrl, {
      method: "POST", credentials: "same-origin",
      headers: { "Content-Type": "application/json", "Accept": "application/json", "X-CSRF-Token": cfg.csrf },
      body: JSON.stringify(body)
    }).then(function (r) {
      return r.json().catch(function () { return {}; }).then(function (b) { return { status: r.status, body: b }; });
    });
  }

  function changed(key) {
    var u = units[key];
    if (!u) { return; }
    var value = getValue(key), comment = getComment(key);
    var base = u.pending || u.acked;
    if (base && base.value === value && base.comment === comment) { return; }
    if (!base && value === null && comment === "") { return; }
    var now = Date.now();
    var rec = { value: value, comment: comment, revision: u.rev + 1,
                seconds: Math.round((now - lastAnswerAt) / 100) / 10 };
    lastAnswerAt = now;
    u.pending = rec;
    lsSet(LS + key, rec);
    if (u.timer) { window.clearTimeout(u.timer); u.timer = null; }
    send(u);
  }

  function send(u) {
    if (u.sending || !u.pending) { return; }
    var rec = u.pending;
    if (rec.revision <= u.rev) { rec.revision = u.rev + 1; lsSet(LS + u.key, rec); }
    u.sending = true;
    show(u, "Saving…", "saving");
    post({ task_id: cfg.taskId, item: u.key, value: rec.value, comment: rec.comment,
           revision: rec.revision, seconds: rec.seconds })
      .then(function (res) { u.sending = false; handle(u, rec, res); },
            function () { u.sending = false; retryLater(u); });
  }

  function handle(u, rec, res) {
    var b = res.body || {};
    if (res.status === 200 && b.ok) {
      u.rev = Math.max(u.rev, b.revision);
      setRev(u);
      u.delay = 1000;
      updateProgress(b.progress);
      if (u.pending === rec) {
        u.pending = null;
        u.acked = { value: b.value, comment: b.comment };
        lsDel(LS + u.key);
        show(u, "Saved", "saved");
        announce("Saved." + progressWords(b.progress));
        u.retrying = false;
      } else {
        send(u);
      }
    } else if (res.status === 409) {
      u.rev = b.revision;
      setRev(u);
      if (u.pending === rec) {
        u.pending = null;
        u.acked = { value: b.value, comment: b.comment || "" };
        lsDel(LS + u.key);
        setValue(u.key, b.value === undefined ? null : b.value);
        setComment(u.key, b.comment || "");
        updatePileCounts();
        updatePileNames();
        show(u, "Changed on another device: updated", "conflict");
        announce("Not saved: this answer was changed on another device, and the newer answer is now shown.");
      } else {
        send(u);
      }
    } else if (res.status >= 500 || res.status === 429 || res.status === 0) {
      retryLater(u);
    } else {
      u.pending = null;
      if (res.status === 400) { lsDel(LS + u.key); }
      show(u, "Not saved: " + (b.error || ("the server answered " + res.status)), "error");
      announce("Not saved: " + (b.error || ("the server answered " + res.status)));
    }
  }

  function retryLater(u) {
    show(u, "Not saved, retrying", "retrying");
    if (!u.retrying) {
      u.retrying = true;
      announce("Not saved yet: no connection to the server. Your answer is kept on this device and is sent " +
               "as soon as the connection is back.");
    }
    if (u.timer) { return; }
    var wait = u.delay;
    u.delay = Math.min(u.delay * 2, MAX_DELAY);
    u.timer = window.setTimeout(function () { u.timer = null; send(u); }, wait);
  }

  function retryAllNow() {
    Object.keys(units).forEach(function (k) {
      var u = units[k];
      if (u.pending && !u.sending) {
        if (u.timer) { window.clearTimeout(u.timer); u.timer = null; }
        u.delay = 1000;
        send(u);
      }
    });
  }

  /* ---------------------------------------------------------------- reconcile */
  function reconcile(first) {
    return fetch(cfg.stateUrl, { credentials: "same-origin", headers: { "Accept": "application/json" } })
      .then(function (r) { return r.json(); })
      .then(function (b) {
        if (!b || !b.ok) { return; }
        var server = {};
        (b.answers || []).forEach(function (a) { server[a.task_id + ":" + a.item] = a; });
        Object.keys(units).forEach(function (k) {
          var u = units[k];
          if (u.sending || (u.pending && !first)) { return; }
          var s = server[cfg.taskId + ":" + k], srev = s ? s.revision : 0, local = lsGet(LS + k);
          if (local && local.revision > srev) {
            setValue(k, local.value);
            setComment(k, local.comment);
            u.rev = Math.max(u.rev, srev);
            u.pending = local;
            send(u);
            return;
          }
          if (local) { lsDel(LS + k); }
          u.pending = null;
          if (s) {
            var differs = s.value !== getValue(k) || (s.comment || "") !== getComment(k);
            u.rev = s.revision;
            setRev(u);
            u.acked = { value: s.value, comment: s.comment || "" };
            if (differs) {
              setValue(k, s.value);
              setComment(k, s.comment || "");
              show(u, "Changed on another device: updated", "conflict");
              announce("An answer on this page was changed on another device; the newer answer is shown.");
            } else {
              show(u, "Saved", "saved");
            }
          }
        });
        resendOtherTasks(server);
        updatePileCounts();
        updatePileNames();
        updateProgress(b.progress);
      })
      .catch(function () {
        Object.keys(units).forEach(function (k) {
          var local = lsGet(LS + k), u = units[k];
          if (local && !u.pending) { setValue(k, local.value); setComment(k, local.comment); u.pending = local; send(u); }
        });
      });
  }

  /* Local copies left from another task page of this link (e.g. the tab was closed while offline). */
  function resendOtherTasks(server) {
    var names = [];
    try {
      for (var i = 0; i < window.localStorage.length; i += 1) {
        var n = window.localStorage.key(i);
        if (n && n.indexOf(PREFIX) === 0 && n.indexOf(LS) !== 0) { names.push(n); }
      }
    } catch (e) { return; }
    names.forEach(function (n) {
      var rest = n.slice(PREFIX.length), cut = rest.indexOf(":");
      var taskId = parseInt(rest.slice(0, cut), 10), item = rest.slice(cut + 1), local = lsGet(n);
      if (!local || isNaN(taskId)) { lsDel(n); return; }
      var s = server[taskId + ":" + item];
      if (s && s.revision >= local.revision) { lsDel(n); return; }
      post({ task_id: taskId, item: item, value: local.value, comment: local.comment,
             revision: local.revision, seconds: local.seconds })
        .then(function (res) { if (res.status < 500 && res.status !== 0 && res.status !== 429) { lsDel(n); } },
              function () { /* keep it for the next visit */ });
    });
  }

  /* ---------------------------------------------------------------- events */
  form.addEventListener("change", function (e) {
    var k = keyOf(e.target);
    if (k && units[k]) {
      if (units[k].debounce) { window.clearTimeout(units[k].debounce); units[k].debounce = null; }
      if (e.target.tagName === "SELECT") { updatePileCounts(); }
      changed(k);
    }
  });
  form.addEventListener("input", function (e) {
    var t = e.target, k = keyOf(t);
    if (!k || !units[k] || !(t.tagName === "TEXTAREA" || t.type === "text")) { return; }
    var u = units[k];
    if (k.indexOf("pile:") === 0) { updatePileCounts(); updatePileNames(); }
    if (u.debounce) { window.clearTimeout(u.debounce); }
    u.debounce = window.setTimeout(function () { u.debounce = null; changed(k); }, 900);
  });
  form.addEventListener("focusout", function (e) {
    var t = e.target, k = keyOf(t);
    if (k && units[k] && (t.tagName === "TEXTAREA" || t.type === "text")) {
      if (units[k].debounce) { window.clearTimeout(units[k].debounce); units[k].debounce = null; }
      changed(k);
    }
  });
  form.addEventListener("keydown", function (e) {
    var t = e.target, k = keyOf(t);
    if (e.key === "Enter" && k && t.type === "text") { e.preventDefault(); changed(k); }
  });
  window.addEventListener("online", retryAllNow);
  document.addEventListener("visibilitychange", function () {
    if (document.visibilityState === "visible") { reconcile(false); }
  });
  var submitting = false;   /* the plain form post carries every value itself */
  form.addEventListener("submit", function () {
    submitting = true;
    /* An answer whose save is still on its way was given after the revision this page was built with:
       post it as newer than that save, so the form's (latest) answer wins instead of looking stale. */
    Object.keys(units).forEach(function (k) {
      var u = units[k], f = field("rev__" + k);
      if (u.pending && f) { f.value = String(Math.max(u.rev, u.pending.revision)); }
    });
  });
  window.addEventListener("beforeunload", function (e) {
    var waiting = !submitting && Object.keys(units).some(function (k) { return units[k].pending; });
    if (waiting) { e.preventDefault(); e.returnValue = ""; }
  });

  Object.keys(units).forEach(function (k) {
    var u = units[k];
    if (u.rev > 0) { u.acked = { value: getValue(k), comment: getComment(k) }; }
  });
  form.setAttribute("data-js-ready", "0");
  reconcile(true).then(function () { form.setAttribute("data-js-ready", "1"); });
}());

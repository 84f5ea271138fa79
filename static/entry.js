// Site entry: show the fields of the chosen method and preview the result as the user types.
// The server does every calculation; this script only posts the form and shows the answer.
// Without signal the same answer comes from the server's library built to WebAssembly
// (static/site.js), and Save keeps the test on the phone until it can be sent.
(function () {
  "use strict";
  var form = document.getElementById("entry-form");
  if (!form) return;
  var method = document.getElementById("method");
  var box = document.getElementById("preview");
  var site = JSON.parse(form.getAttribute("data-site") || "{}");
  var note = document.getElementById("offline-note");

  function formObject() {
    var o = {};
    new FormData(form).forEach(function (v, k) { o[k] = String(v); });
    delete o.action;
    return o;
  }
  // The answer worked out on the phone, by the same library and parser as the server.
  function offlineAnswer() {
    return window.liftSite.answer({
      rules: site.rules, instruments: site.instruments, unit_system: site.unit_system,
      chainage_style: site.chainage_style, form: formObject(),
      retest: form.getAttribute("data-retest") === "yes", today: new Date().toISOString().slice(0, 10)
    });
  }
  function offline() { return !navigator.onLine; }
  // A page kept on the phone shows the time it was served: a test taken later without
  // signal gets the phone's clock (UTC) unless the technician typed a time.
  var taken = form.elements.tested_at;
  var servedAt = taken ? taken.value : "";
  function freshTime() {
    if (taken && (taken.value === servedAt || taken.value === "")) {
      servedAt = new Date().toISOString().slice(0, 16);
      taken.value = servedAt;
    }
  }
  function showNote() {
    if (note) note.hidden = navigator.onLine;
    if (offline()) freshTime();
  }

  function showMethod() {
    var m = method.value;
    form.querySelectorAll("fieldset[data-method]").forEach(function (fs) {
      fs.hidden = fs.getAttribute("data-method").split(" ").indexOf(m) < 0;
    });
  }

  function clearErrors() {
    form.querySelectorAll(".err").forEach(function (e) { e.textContent = ""; });
    form.querySelectorAll(".has-error").forEach(function (e) { e.classList.remove("has-error"); });
  }

  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined) e.textContent = text;
    if (cls) e.className = cls;
    return e;
  }

  function render(data) {
    clearErrors();
    var errors = data.errors || {};
    Object.keys(errors).forEach(function (k) {
      var e = document.getElementById(k + "-err");
      if (e) {
        e.textContent = errors[k];
        var f = document.getElementById(k + "-field");
        if (f) f.classList.add("has-error");
      }
    });
    box.textContent = "";
    var p = data.preview;
    if (!p) return;
    var card = el("div", undefined, "verdict " + (p.passed ? "meets" : "short"));
    card.id = "preview-result";
    card.appendChild(el("h2", "This test " + p.verdict + " (not saved yet)"));
    var dl = el("dl", undefined, "facts");
    [["dry density", p.dry, "pv-dry"], ["water content", p.water], ["wet density", p.wet],
     ["relative compaction", p.rc, "pv-rc"], ["moisture deviation", p.dev], ["reference", p.reference]].forEach(function (row) {
      dl.appendChild(el("dt", row[0]));
      var dd = el("dd", row[1]);
      if (row[2]) dd.id = row[2];
      dl.appendChild(dd);
    });
    card.appendChild(dl);
    if (p.instrument) {
      var inst = el("p", p.instrument, "instrument");
      inst.id = "pv-instrument";
      card.appendChild(inst);
    }
    if (p.reasons && p.reasons.length) {
      var ul = el("ul");
      p.reasons.forEach(function (r) { ul.appendChild(el("li", r)); });
      card.appendChild(ul);
    }
    box.appendChild(card);
  }

  var timer = null;
  var seq = 0;
  function schedule() {
    clearTimeout(timer);
    timer = setTimeout(preview, 350);
  }
  function preview() {
    var body = new URLSearchParams(new FormData(form));
    body.set("action", form.getAttribute("data-retest") === "yes" ? "retest" : "check");
    var mine = ++seq;
    if (offline() && window.liftSite) {
      offlineAnswer().then(function (data) { if (mine === seq) render(data); });
      return;
    }
    fetch(form.getAttribute("data-preview"), {
      method: "POST",
      headers: { "Content-Type": "application/x-www-form-urlencoded" },
      body: body.toString(),
      credentials: "same-origin"
    }).then(function (r) { return r.json(); }).then(function (data) {
      if (mine === seq) render(data);
    }).catch(function () {
      if (window.liftSite) offlineAnswer().then(function (data) { if (mine === seq) render(data); });
    });
  }

  // Without signal, Check previews on the phone and Save keeps the test for sending.
  form.addEventListener("submit", function (ev) {
    if (!offline() || !window.liftSite || !site.rules) return;
    ev.preventDefault();
    var action = ev.submitter ? ev.submitter.value : "check";
    offlineAnswer().then(function (data) {
      render(data);
      if (action !== "save" || Object.keys(data.errors || {}).length) return;
      // A retest goes to its failed test's retests (site.post_url), and is judged against
      // the failed test's chain when the server receives it.
      var kept = formObject();
      return window.liftSite.enqueue({
        lot_id: site.rules.lot_id, lot_code: site.lot_code, post_url: site.post_url,
        input: data.input, form: kept
      }).then(function () {
        box.textContent = "";
        var done = document.createElement("p");
        done.id = "kept-offline";
        done.className = "offline-note";
        done.textContent = "Kept on this phone; it is sent when there is signal.";
        box.appendChild(done);
        ["number", "wet_density", "moisture_density", "gauge_water_content_pct", "oven_water_content_pct",
         "mass_sand_used_g", "mass_sand_in_cone_g", "hole_volume_cm3", "cylinder_volume_cm3", "mass_wet_soil_g",
         "water_content_pct", "chainage"].forEach(function (k) { if (form.elements[k]) form.elements[k].value = ""; });
        freshTime();
      });
    });
  });
  window.addEventListener("online", showNote);
  window.addEventListener("offline", showNote);
  showNote();

  method.addEventListener("change", function () { showMethod(); schedule(); });
  form.addEventListener("input", schedule);
  showMethod();
})();

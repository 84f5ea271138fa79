// Site entry: show the fields of the chosen method and preview the result as the user types.
// The server does every calculation; this script only posts the form and shows the answer.
(function () {
  "use strict";
  var form = document.getElementById("entry-form");
  if (!form) return;
  var method = document.getElementById("method");
  var box = document.getElementById("preview");

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
    fetch(form.getAttribute("data-preview"), {
      method: "POST",
      headers: { "Content-Type": "application/x-www-form-urlencoded" },
      body: body.toString(),
      credentials: "same-origin"
    }).then(function (r) { return r.json(); }).then(function (data) {
      if (mine === seq) render(data);
    }).catch(function () { /* offline: the Check button still works */ });
  }

  method.addEventListener("change", function () { showMethod(); schedule(); });
  form.addEventListener("input", schedule);
  showMethod();
})();

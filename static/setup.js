// Set-up forms: on the lab curve form, redraw the preview as specimens are typed,
// through the same server preview the Preview button uses. Forms work without this.
(function () {
  "use strict";
  var form = document.getElementById("setup-form");
  var target = document.getElementById("preview");
  if (!form || !target) { return; }
  var url = form.getAttribute("data-live-preview");
  if (!url || url === "yes") { return; }
  var timer = null;
  var seq = 0;
  function refresh() {
    var mine = ++seq;
    var body = new URLSearchParams(new FormData(form));
    body.set("action", "preview");
    fetch(url, { method: "POST", body: body, credentials: "same-origin",
                 headers: { "Content-Type": "application/x-www-form-urlencoded" } })
      .then(function (r) { return r.ok ? r.text() : ""; })
      .then(function (html) { if (mine === seq && html) { target.innerHTML = html; } })
      .catch(function () { /* offline: the Preview button still works */ });
  }
  form.addEventListener("input", function () {
    clearTimeout(timer);
    timer = setTimeout(refresh, 400);
  });
})();

// Import page: send the form with XMLHttpRequest so the upload's progress can be shown,
// then show the server's answer in place of this page. Without this script the form
// posts as usual and the server answers with the same page.
(function () {
  "use strict";
  var form = document.getElementById("import-form");
  if (!form || !window.FormData || !window.XMLHttpRequest) return;
  var box = document.getElementById("import-progress");
  var bar = document.getElementById("upload-bar");
  var status = document.getElementById("upload-status");
  var busy = false;

  function size(n) {
    if (n < 1024) return n + " bytes";
    if (n < 1024 * 1024) return (n / 1024).toFixed(1) + " KiB";
    return (n / (1024 * 1024)).toFixed(1) + " MiB";
  }

  function buttons(disabled) {
    form.querySelectorAll("button").forEach(function (b) { b.disabled = disabled; });
  }

  function fail(text) {
    busy = false;
    buttons(false);
    bar.value = 0;
    status.textContent = text;
  }

  // Puts the server's page in place of this one (its scripts load as usual).
  function show(xhr, sent) {
    var type = xhr.getResponseHeader("Content-Type") || "";
    var here = new URL(form.action, window.location.href).href;
    if (xhr.responseURL && xhr.responseURL !== here) {
      // Redirected (a session that ended goes to the sign-in page): go there.
      window.location.assign(xhr.responseURL);
      return;
    }
    if (type.indexOf("text/html") !== 0) {
      fail("The server refused the file (" + xhr.status + "): " + xhr.responseText.slice(0, 200));
      return;
    }
    document.open();
    document.write(xhr.responseText);
    document.close();
    // Tells a reader (and the browser tests) that the answer came by this script.
    document.documentElement.setAttribute("data-uploaded-bytes", String(sent));
  }

  form.addEventListener("submit", function (ev) {
    var button = ev.submitter;
    // Without a known button (very old browsers) the plain form post is left to work.
    if (!button || !button.value) return;
    ev.preventDefault();
    if (busy) return;
    var file = form.querySelector("input[type=file]").files[0];
    var max = Number(form.getAttribute("data-max-bytes"));
    box.hidden = false;
    if (file && max && file.size > max) {
      fail("The file is " + size(file.size) + "; an import may be at most " + size(max) + ".");
      return;
    }
    var data = new FormData(form);
    data.append("mode", button.value);
    var working = button.value === "commit" ? "Importing rows…" : "Checking rows…";
    var sent = 0;
    var xhr = new XMLHttpRequest();
    xhr.open("POST", form.action);
    xhr.upload.addEventListener("progress", function (e) {
      sent = e.loaded;
      if (e.lengthComputable) {
        bar.max = e.total;
        bar.value = e.loaded;
        status.textContent = "Uploading: " + size(e.loaded) + " of " + size(e.total);
      } else {
        status.textContent = "Uploading: " + size(e.loaded);
      }
    });
    xhr.upload.addEventListener("load", function () {
      bar.removeAttribute("value");
      status.textContent = working;
    });
    xhr.addEventListener("load", function () { show(xhr, sent); });
    xhr.addEventListener("error", function () {
      fail("The upload did not finish (connection lost). Check the test list before trying again.");
    });
    busy = true;
    buttons(true);
    bar.value = 0;
    status.textContent = "Uploading…";
    xhr.send(data);
  });
})();

// liftledger site app: the service worker, the reduction library in WebAssembly (the
// server's own src/reduction, src/present.rs and src/site_form.rs, built from wasm/), and
// the queue of tests kept on the phone (IndexedDB) until they can be sent.
//
// This script computes nothing: every number and every refusal comes from the wasm
// build, and every stored test from the server. A queued test carries an idempotency key
// and is sent with it (Idempotency-Key), so a retry never doubles it; the server numbers
// tests left without a number when they arrive. A test the server refuses stays here with
// its reason until it is fixed or discarded.
(function () {
  "use strict";
  var site = {};
  window.liftSite = site;

  if ("serviceWorker" in navigator) {
    navigator.serviceWorker.register("/sw.js").catch(function () { /* no worker: online only */ });
  }
  // The lot picked for the day: keep this entry page (with its lot's rules) for offline use
  // now, not only from the next visit the worker sees.
  site.kept = function () {
    return window.caches ? caches.match(location.pathname) : Promise.resolve(undefined);
  };
  function keepThisPage() {
    if (!window.caches || !navigator.serviceWorker || !navigator.onLine) return;
    navigator.serviceWorker.ready.then(function () {
      return caches.open("liftledger-site-v1").then(function (c) { return c.add(location.pathname); });
    }).catch(function () {});
  }

  // --- The reduction library -------------------------------------------------------
  var wasm = null;
  function library() {
    if (!wasm) {
      wasm = fetch("/static/site.wasm")
        .then(function (r) { if (!r.ok) throw new Error("site.wasm " + r.status); return r.arrayBuffer(); })
        .then(function (bytes) { return WebAssembly.instantiate(bytes, {}); })
        .then(function (m) { return m.instance.exports; });
      wasm.catch(function () { wasm = null; });
    }
    return wasm;
  }
  // The server's preview answer for a form, worked out here, as the library's JSON text.
  site.answerText = function (request) {
    return library().then(function (x) {
      var bytes = new TextEncoder().encode(JSON.stringify(request));
      var p = x.site_alloc(bytes.length);
      new Uint8Array(x.memory.buffer, p, bytes.length).set(bytes);
      var out = x.site_answer(p, bytes.length);
      var len = new DataView(x.memory.buffer).getUint32(out, true);
      var text = new TextDecoder().decode(new Uint8Array(x.memory.buffer, out + 4, len));
      x.site_free(out, len + 4);
      return text;
    });
  };
  // The same answer parsed: {errors, preview, values, input}.
  site.answer = function (request) {
    return site.answerText(request).then(JSON.parse);
  };

  // --- The queue ---------------------------------------------------------------------
  var dbp = null;
  function db() {
    if (!dbp) {
      dbp = new Promise(function (ok, fail) {
        var r = indexedDB.open("liftledger-site", 1);
        r.onupgradeneeded = function () { r.result.createObjectStore("queue", { keyPath: "key" }); };
        r.onsuccess = function () { ok(r.result); };
        r.onerror = function () { fail(r.error); };
      });
    }
    return dbp;
  }
  function store(mode, work) {
    return db().then(function (d) {
      return new Promise(function (ok, fail) {
        var t = d.transaction("queue", mode);
        var result = work(t.objectStore("queue"));
        t.oncomplete = function () { ok(result && result.result); };
        t.onerror = function () { fail(t.error); };
      });
    });
  }
  site.all = function () {
    return store("readonly", function (s) { return s.getAll(); }).then(function (items) {
      return (items || []).sort(function (a, b) { return a.created < b.created ? -1 : 1; });
    });
  };
  site.put = function (item) { return store("readwrite", function (s) { s.put(item); }); };
  site.discard = function (key) { return store("readwrite", function (s) { s.delete(key); }); };
  site.newKey = function () {
    if (crypto.randomUUID) return crypto.randomUUID();
    var b = crypto.getRandomValues(new Uint8Array(16));
    return Array.prototype.map.call(b, function (x) { return (x + 256).toString(16).slice(1); }).join("");
  };
  // Keeps a test for sending: {lot_id, lot_code, post_url, input, form}.
  site.enqueue = function (entry) {
    entry.key = site.newKey();
    entry.created = new Date().toISOString();
    entry.state = "queued";
    entry.reason = "";
    return site.put(entry).then(function () { site.changed(); return entry; });
  };

  // --- Sending -------------------------------------------------------------------------
  var status = "";
  var sending = null;
  function reasonOf(body, code) {
    var e = body && body.error;
    if (!e) return "refused by the server (" + code + ")";
    var words = e.message || "refused";
    if (e.reasons && e.reasons.length) words += ": " + e.reasons.join("; ");
    return (e.field ? e.field + ": " : "") + words;
  }
  function sendOne(item) {
    return fetch(item.post_url, {
      method: "POST",
      credentials: "same-origin",
      headers: { "Content-Type": "application/json", "Idempotency-Key": item.key },
      body: JSON.stringify(item.input)
    }).then(function (r) {
      return r.json().catch(function () { return null; }).then(function (body) {
        if (r.status === 200 || r.status === 201) return site.discard(item.key).then(function () { return "sent"; });
        if (r.status === 401 || r.status === 403) return "signed-out";
        if (r.status >= 400 && r.status < 500) {
          item.state = "refused";
          item.reason = reasonOf(body, r.status);
          return site.put(item).then(function () { return "refused"; });
        }
        return "later";
      });
    }, function () { return "later"; });
  }
  // Sends every queued test in order; stops at the first that cannot be sent now.
  site.sync = function () {
    if (sending) return sending;
    sending = site.all().then(function (items) {
      var todo = items.filter(function (i) { return i.state === "queued"; });
      var sent = 0;
      function next() {
        if (!todo.length) { status = sent ? sent + " sent" : ""; return; }
        return sendOne(todo.shift()).then(function (how) {
          if (how === "sent") sent += 1;
          if (how === "signed-out") { status = "Sign in again to send the tests kept on this phone."; return; }
          if (how === "later") { status = "No connection to the server: the tests stay on this phone and are sent when it answers."; return; }
          return next();
        });
      }
      return next();
    }).catch(function () {}).then(function () { sending = null; site.changed(); });
    return sending;
  };

  // --- Showing the queue (on the entry page) ----------------------------------------
  var listeners = [];
  site.onChange = function (f) { listeners.push(f); };
  site.changed = function () {
    site.all().then(function (items) { listeners.forEach(function (f) { f(items, status); }); render(items); });
  };
  function el(tag, text, cls) {
    var e = document.createElement(tag);
    if (text !== undefined) e.textContent = text;
    if (cls) e.className = cls;
    return e;
  }
  var shown = null;
  function render(items) {
    var box = document.getElementById("site-queue");
    if (!box) return;
    // Redraw only when something changed, so a button is never swapped under a finger.
    var now = JSON.stringify([items, status]);
    if (now === shown) return;
    shown = now;
    var list = document.getElementById("queue-list");
    box.hidden = items.length === 0 && !status;
    document.getElementById("queue-status").textContent =
      (items.length ? items.length + " test(s) kept on this phone. " : "") + status;
    list.textContent = "";
    items.forEach(function (item) {
      var li = el("li", undefined, item.state === "refused" ? "refused" : "queued");
      li.setAttribute("data-key", item.key);
      li.appendChild(el("strong", (item.input.number || "number given at sync") + " · lot " + item.lot_code +
        " · " + (item.form.chainage || "")));
      li.appendChild(el("div", item.state === "refused" ? "Refused by the server:" : "Waiting to be sent"));
      if (item.reason) li.appendChild(el("div", item.reason, "reason"));
      if (item.state === "refused") {
        var fix = el("button", "Fix", "secondary");
        fix.type = "button";
        fix.className = "secondary fix";
        fix.addEventListener("click", function () { site.fix(item); });
        li.appendChild(fix);
        var drop = el("button", "Discard", "secondary discard");
        drop.type = "button";
        drop.addEventListener("click", function () {
          if (window.confirm("Discard this test? It was never stored.")) site.discard(item.key).then(site.changed);
        });
        li.appendChild(drop);
      }
      list.appendChild(li);
    });
  }
  // Puts a refused test back in the form (of its lot's entry page) to correct and save again.
  site.fix = function (item) {
    var form = document.getElementById("entry-form");
    var here = form && JSON.parse(form.getAttribute("data-site") || "{}");
    if (!here.rules || here.rules.lot_id !== item.lot_id) {
      window.location.href = "/lots/" + item.lot_id + "/entry";
      return;
    }
    Object.keys(item.form).forEach(function (k) {
      var f = form.elements[k];
      if (f && f.type === "checkbox") f.checked = item.form[k] === "on";
      else if (f && f.value !== undefined) f.value = item.form[k];
    });
    site.discard(item.key).then(function () {
      site.changed();
      form.dispatchEvent(new Event("input"));
    });
  };

  window.addEventListener("online", function () { site.sync(); });
  document.addEventListener("DOMContentLoaded", function () {
    // Load the library while there is signal, so the preview works when there is none.
    if (document.getElementById("entry-form")) {
      library().catch(function () {});
      keepThisPage();
    }
    site.changed();
    site.sync();
  });
  setInterval(function () { if (navigator.onLine) site.sync(); }, 5000);
})();

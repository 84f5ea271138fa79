// liftledger site app: keeps the entry pages a technician opened, and the files they need,
// so the form and its preview work without signal. Network first; the cache answers only
// when the network does not. Tests are never sent from here (static/site.js queues them).
"use strict";
var CACHE = "liftledger-site-v1";
var FILES = ["/static/style.css", "/static/entry.js", "/static/site.js", "/static/site.wasm", "/site.webmanifest"];

self.addEventListener("install", function (e) {
  e.waitUntil(caches.open(CACHE).then(function (c) { return c.addAll(FILES); }).then(function () { return self.skipWaiting(); }));
});
self.addEventListener("activate", function (e) {
  e.waitUntil(self.clients.claim());
});

function keep(url) {
  var p = new URL(url).pathname;
  return FILES.indexOf(p) >= 0 || /^\/lots\/\d+\/entry$/.test(p) || /^\/lots\/\d+$/.test(p);
}

self.addEventListener("fetch", function (e) {
  var req = e.request;
  if (req.method !== "GET" || new URL(req.url).origin !== self.location.origin || !keep(req.url)) return;
  e.respondWith(fetch(req).then(function (res) {
    if (res.ok) {
      var copy = res.clone();
      caches.open(CACHE).then(function (c) { c.put(req, copy); });
    }
    return res;
  }).catch(function () {
    return caches.match(req, { ignoreSearch: true }).then(function (hit) {
      return hit || new Response("Offline, and this page was not kept on this phone.", { status: 503, headers: { "Content-Type": "text/plain; charset=utf-8" } });
    });
  }));
});

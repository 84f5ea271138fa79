// The API page: lists the operations of this server's own OpenAPI document
// (/api/v1/openapi.json), and sends a request with the signed-in user's session cookie
// (same-origin only, so the server's same-origin check sees this site's Origin).
(function () {
  "use strict";
  var DOC_URL = "/api/v1/openapi.json";
  var METHODS = ["get", "post", "put", "delete"];

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined) e.textContent = text;
    return e;
  }

  // Follows a local "$ref" ("#/components/schemas/X") inside the document.
  function resolve(doc, schema) {
    var seen = 0;
    while (schema && schema.$ref && seen < 20) {
      var parts = schema.$ref.replace(/^#\//, "").split("/");
      schema = parts.reduce(function (v, k) { return v ? v[k] : undefined; }, doc);
      seen += 1;
    }
    return schema || {};
  }

  // A starting body for the form: the schema's example, or its required fields.
  function sampleBody(doc, schema) {
    var s = resolve(doc, schema);
    if (s.example !== undefined) return s.example;
    if (s.type === "object" || s.properties) {
      var out = {};
      (s.required || []).forEach(function (k) {
        var p = resolve(doc, (s.properties || {})[k]);
        out[k] = p.example !== undefined ? p.example : (p["enum"] ? p["enum"][0] : null);
      });
      return out;
    }
    return {};
  }

  function describeSchema(doc, schema) {
    var s = resolve(doc, schema);
    var name = schema && schema.$ref ? schema.$ref.split("/").pop() : (s.type || "value");
    return name;
  }

  function paramInput(p) {
    var label = el("label", "api-param");
    label.appendChild(document.createTextNode(p.name + " (" + p["in"] + (p.required ? ", required" : "") + ") "));
    var input = el("input");
    input.name = p.name;
    input.setAttribute("data-in", p["in"]);
    var sch = p.schema || {};
    if (sch["enum"]) input.placeholder = sch["enum"].join(" | ");
    else if (sch.type) input.placeholder = [].concat(sch.type).join(" | ");
    if (p.name === "id") input.value = "1";
    label.appendChild(input);
    if (p.description) label.appendChild(el("small", null, " " + p.description));
    return label;
  }

  function buildUrl(path, form) {
    var query = [];
    Array.prototype.forEach.call(form.querySelectorAll("input[data-in]"), function (i) {
      if (i.value === "") return;
      var where = i.getAttribute("data-in");
      if (where === "path") path = path.replace("{" + i.name + "}", encodeURIComponent(i.value));
      else if (where === "query") query.push(encodeURIComponent(i.name) + "=" + encodeURIComponent(i.value));
    });
    return path + (query.length ? "?" + query.join("&") : "");
  }

  function headersOf(form, hasBody) {
    var h = {};
    if (hasBody) h["Content-Type"] = form.getAttribute("data-content-type") || "application/json";
    Array.prototype.forEach.call(form.querySelectorAll("input[data-in=header]"), function (i) {
      if (i.value !== "") h[i.name] = i.value;
    });
    return h;
  }

  function show(out, status, text, type) {
    out.textContent = "";
    var refused = status >= 400;
    out.appendChild(el("p", refused ? "api-status-refused" : "api-status-ok", "HTTP " + status));
    if (type && type.indexOf("json") >= 0) {
      try { text = JSON.stringify(JSON.parse(text), null, 2); } catch (e) { /* shown as sent */ }
    }
    out.appendChild(el("pre", null, text));
  }

  function send(method, path, form, out) {
    var area = form.querySelector("textarea");
    var url = buildUrl(path, form);
    var init = {
      method: method.toUpperCase(),
      credentials: "same-origin",
      mode: "same-origin",
      headers: headersOf(form, !!area)
    };
    if (area) init.body = area.value;
    out.textContent = "Sending " + init.method + " " + url + " …";
    fetch(url, init).then(function (r) {
      var type = r.headers.get("content-type") || "";
      if (type.indexOf("json") < 0 && type.indexOf("text") < 0) {
        return r.blob().then(function (b) {
          show(out, r.status, type + ", " + b.size + " bytes (open the URL to download it)", type);
        });
      }
      return r.text().then(function (t) { show(out, r.status, t, type); });
    }, function (e) {
      out.textContent = "No answer: " + e;
    });
  }

  function operationBox(doc, method, path, op) {
    var box = el("details", "api-op");
    box.setAttribute("data-search", (method + " " + path + " " + (op.summary || "") + " " + (op.tags || []).join(" ")).toLowerCase());
    var head = el("summary");
    head.appendChild(el("span", "api-method api-" + method, method));
    head.appendChild(el("span", "api-path", path));
    head.appendChild(document.createTextNode(" " + (op.summary || "")));
    box.appendChild(head);
    if (op.description) box.appendChild(el("p", null, op.description));

    var form = el("form");
    (op.parameters || []).forEach(function (p) { form.appendChild(paramInput(resolve(doc, p))); });
    var content = op.requestBody && op.requestBody.content;
    if (content) {
      var type = Object.keys(content)[0];
      form.setAttribute("data-content-type", type);
      form.appendChild(el("p", null, "Body (" + type + ", " + describeSchema(doc, content[type].schema) + ")"));
      var area = el("textarea");
      area.name = "body";
      area.value = type.indexOf("json") >= 0
        ? JSON.stringify(sampleBody(doc, content[type].schema), null, 2)
        : "";
      form.appendChild(area);
    }
    var button = el("button", null, "Send");
    button.type = "submit";
    form.appendChild(button);
    var out = el("div", "api-answer");
    form.addEventListener("submit", function (e) {
      e.preventDefault();
      send(method, path, form, out);
    });
    box.appendChild(form);

    var codes = Object.keys(op.responses || {});
    box.appendChild(el("p", null, "Answers: " + codes.map(function (c) {
      var r = op.responses[c];
      var media = r.content && r.content[Object.keys(r.content)[0]];
      return c + (media && media.schema ? " " + describeSchema(doc, media.schema) : "");
    }).join(", ")));
    box.appendChild(out);
    return box;
  }

  function render(doc) {
    var list = document.getElementById("api-ops");
    list.textContent = "";
    Object.keys(doc.paths).sort().forEach(function (path) {
      METHODS.forEach(function (m) {
        var op = doc.paths[path][m];
        if (op) list.appendChild(operationBox(doc, m, path, op));
      });
    });
    var filter = document.getElementById("api-filter");
    filter.addEventListener("input", function () {
      var q = filter.value.toLowerCase();
      Array.prototype.forEach.call(list.children, function (box) {
        box.hidden = q !== "" && box.getAttribute("data-search").indexOf(q) < 0;
      });
    });
  }

  document.addEventListener("DOMContentLoaded", function () {
    fetch(DOC_URL, { credentials: "same-origin" })
      .then(function (r) { return r.json(); })
      .then(render, function (e) {
        document.getElementById("api-ops").textContent = "The document could not be read: " + e;
      });
  });
})();

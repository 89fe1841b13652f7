// plumb dashboard: live refresh and alert actions. No libraries.
(function () {
  "use strict";
  var body = document.body;
  var refresh = parseInt(body.dataset.refresh, 10) || 3000;
  // version is what the page shows; the server answers 304 while it is current.
  var version = body.dataset.version || "";
  var live = document.getElementById("live");
  var liveText = document.getElementById("live-text");
  var statusEl = document.getElementById("status");
  var tokenEl = document.getElementById("token");
  var whoEl = document.getElementById("who");
  var busy = false;

  function store(key, el) {
    if (!el) return;
    try { el.value = sessionStorage.getItem(key) || ""; } catch (e) { /* storage off */ }
    el.addEventListener("change", function () {
      try { sessionStorage.setItem(key, el.value); } catch (e) { /* storage off */ }
    });
  }
  store("plumb.token", tokenEl);
  store("plumb.by", whoEl);

  function say(msg, isErr) {
    statusEl.textContent = msg;
    statusEl.classList.toggle("err", !!isErr);
  }

  function clock() {
    var d = new Date();
    return d.toISOString().slice(11, 19) + "Z";
  }

  // reload fetches the page again and swaps its main content in place.
  function reload() {
    return fetch(location.href, { headers: { "Accept": "text/html" }, cache: "no-store" })
      .then(function (r) { return r.text(); })
      .then(function (html) {
        var doc = new DOMParser().parseFromString(html, "text/html");
        var next = doc.getElementById("main");
        if (!next) return;
        // keep notes being typed
        var typing = document.activeElement && document.activeElement.closest && document.activeElement.closest("#main form");
        if (typing) return;
        document.getElementById("main").replaceWith(next);
        version = doc.body.dataset.version || version;
        body.dataset.version = version;
        live.classList.add("flash");
        setTimeout(function () { live.classList.remove("flash"); }, 600);
        liveText.textContent = "updated " + clock();
      });
  }

  function poll() {
    var headers = {};
    if (version) headers["If-None-Match"] = '"' + version + '"';
    fetch("/api/v1/version", { headers: headers, cache: "no-store" })
      .then(function (r) {
        live.classList.remove("stale");
        if (r.status === 304) return null;
        if (!r.ok) throw new Error("status " + r.status);
        return r.json();
      })
      .then(function (v) {
        if (v && v.version && v.version !== version && !busy) return reload();
      })
      .catch(function () {
        live.classList.add("stale");
        liveText.textContent = "no contact " + clock();
      })
      .finally(function () { setTimeout(poll, refresh); });
  }
  setTimeout(poll, refresh);

  function authHeaders() {
    var headers = { "Content-Type": "application/json" };
    var token = tokenEl ? tokenEl.value.trim() : "";
    if (token) headers["Authorization"] = "Bearer " + token;
    return headers;
  }

  // acting shows who plumb takes the caller for, with the token typed in.
  var actingEl = document.getElementById("acting");
  function whoami() {
    if (!actingEl) return;
    fetch("/api/v1/whoami", { headers: authHeaders(), cache: "no-store" })
      .then(function (r) { return r.ok ? r.json() : null; })
      .then(function (u) {
        if (u) actingEl.textContent = "acting as " + (u.name || "anonymous") + " (" + u.role + ")";
      })
      .catch(function () { /* keep the server's word */ });
  }
  whoami();
  if (tokenEl) tokenEl.addEventListener("change", whoami);

  // utc reads a datetime-local input as UTC ("" when empty).
  function utc(v) { return v ? v + (v.length === 16 ? ":00Z" : "Z") : ""; }

  // Decisions: set aside, reinstate, re-baseline, quiet period. The
  // answer comes once the decision is committed.
  document.addEventListener("click", function (ev) {
    var btn = ev.target.closest && ev.target.closest("button[data-decide]");
    if (!btn) return;
    ev.preventDefault();
    ev.stopPropagation();
    var act = btn.dataset.decide;
    var model = btn.dataset.model;
    var form = btn.closest("form");
    var reason = form && form.elements.note ? form.elements.note.value.trim() : "";
    var body = { reason: reason };
    var url = "/api/v1/models/" + encodeURIComponent(model) + "/" + act;
    if (btn.dataset.obs) body.obs = parseInt(btn.dataset.obs, 10);
    if (btn.dataset.row) body.row = btn.dataset.row;
    if (btn.dataset.alert) body.alert = btn.dataset.alert;
    if (act === "rebaseline" && form.elements.from && form.elements.from.value) body.from = utc(form.elements.from.value);
    if (act === "quiet") {
      url = "/api/v1/quiet";
      body.model = model;
      body.end = form.elements.end ? utc(form.elements.end.value) : "";
      if (form.elements.start && form.elements.start.value) body.start = utc(form.elements.start.value);
    }
    if (act === "end-quiet") url = "/api/v1/quiet/" + encodeURIComponent(btn.dataset.id) + "/end";
    if (!reason) {
      say("A reason is required: type it in the box beside the button.", true);
      if (form && form.elements.note) form.elements.note.focus();
      return;
    }
    busy = true;
    btn.disabled = true;
    fetch(url, { method: "POST", headers: authHeaders(), body: JSON.stringify(body) })
      .then(function (r) {
        return r.json().then(function (j) { return { ok: r.ok, status: r.status, body: j }; });
      })
      .then(function (res) {
        if (!res.ok) {
          if (res.status === 401) {
            document.querySelector(".tok").classList.remove("hidden");
            tokenEl.focus();
          }
          say(btn.textContent + " refused: " + (res.body.error || res.status), true);
          btn.disabled = false;
          return;
        }
        say(res.body.note || (btn.textContent + " recorded."), false);
        if (document.activeElement) document.activeElement.blur();
        return reload();
      })
      .catch(function (e) {
        say("Could not reach plumb: " + e.message, true);
        btn.disabled = false;
      })
      .finally(function () { busy = false; });
  });

  document.addEventListener("click", function (ev) {
    var btn = ev.target.closest && ev.target.closest("button[data-act]");
    if (!btn) return;
    ev.preventDefault();
    var id = btn.dataset.id;
    var act = btn.dataset.act;
    var form = btn.closest("form");
    var note = form && form.elements.note ? form.elements.note.value : "";
    var headers = { "Content-Type": "application/json" };
    var token = tokenEl ? tokenEl.value.trim() : "";
    if (token) headers["Authorization"] = "Bearer " + token;
    busy = true;
    btn.disabled = true;
    fetch("/api/v1/alerts/" + encodeURIComponent(id) + "/" + act, {
      method: "POST",
      headers: headers,
      body: JSON.stringify({ note: note, by: whoEl ? whoEl.value : "" })
    })
      .then(function (r) {
        return r.json().then(function (j) { return { ok: r.ok, status: r.status, body: j }; });
      })
      .then(function (res) {
        if (!res.ok) {
          if (res.status === 401) {
            document.querySelector(".tok").classList.remove("hidden");
            tokenEl.focus();
          }
          say((act === "ack" ? "Acknowledge" : "Resolve") + " refused: " + (res.body.error || res.status), true);
          btn.disabled = false;
          return;
        }
        say("Alert " + id + " is now " + res.body.state + ".", false);
        if (document.activeElement) document.activeElement.blur();
        return reload();
      })
      .catch(function (e) {
        say("Could not reach plumb: " + e.message, true);
        btn.disabled = false;
      })
      .finally(function () { busy = false; });
  });
})();

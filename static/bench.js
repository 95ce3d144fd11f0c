/* Claybench bench sheet: every accepted field saved as typed, nothing lost offline or on reload.
 *
 * - Each edit is written at once to this tablet's storage (localStorage, per test), then the
 *   live preview runs (htmx, "cb-preview"); fields the engine accepts are sent to
 *   /tests/{id}/fields with the value the page last saw stored there (the base).
 * - A field another device changed meanwhile comes back as a conflict: both values stay on
 *   the screen until the technician keeps theirs or takes the other.
 * - Without a connection the banner says how many values are kept here; they are sent, in
 *   the order typed, when the connection returns, and put back into the inputs on reload.
 * - A server too busy to store them now (503 with Retry-After, server/web/busy.py; or 502/504
 *   from a proxy) is no refusal: the values stay kept, the page says it will retry, and sends
 *   them again after Retry-After, then after growing waits, as it does without a connection.
 * - What is kept belongs to the person who typed it: stored under their user id with the time it
 *   was typed, sent only while they are signed in (the server refuses it from anyone else), and
 *   stamped so that the audit event says when it was typed. Entries another person left here are
 *   never put into the inputs: the page says they wait, and offers to discard them with a reason.
 * - While the sign-out dialog (static/signout.js) asks what to do with unsent values, nothing is
 *   sent behind it ("cb-hold"); its "Send now" asks this sheet to send ("cb-send-now").
 * Our own code, no dependencies.
 */
(function () {
  "use strict";
  var form = document.getElementById("sheet");
  if (!form || !form.dataset.test) return;

  // The signed-in person; this tablet's entries of this test are kept under their id, apart from
  // anybody else's (and from the key entries had before they carried their typist).
  var me = { id: Number(form.dataset.userId), username: form.dataset.username || "", name: form.dataset.userName || "" };
  var storePrefix = "claybench.bench." + form.dataset.test;
  var storeKey = storePrefix + ".u" + me.id;
  var csrf = form.querySelector('input[name="csrf_token"]').value;
  var versionInput = form.querySelector('input[name="version"]');
  var banner = document.getElementById("net");
  var stateLine = document.getElementById("save-state");
  var atButton = document.getElementById("hand-in-state"); // a refused hand-in, said where it was pressed
  var storedEl = document.getElementById("stored-values");
  var saved = storedEl ? JSON.parse(storedEl.textContent || "{}") : {};
  var pending = {}; // path -> {value, base, seq, state: "typed" | "conflict", theirs}
  var touched = {};
  var seq = 0;
  var online = true;
  var sending = false;
  var again = false;
  var locked = "";
  var problem = "";
  var lastRefused = "";
  var snapshot = null;
  var previewTimer = null;
  var retryTimer = null;
  var busy = false; // the server said "busy, try again later" to the last save
  var failures = 0; // tries in a row that met no connection or a busy server: the wait grows
  var notBefore = 0; // no save is sent on its own before this time (Retry-After, the backoff)
  var LATER = { 502: true, 503: true, 504: true }; // answers that mean "try again", not "refused"
  var waiters = [];
  var held = false; // the sign-out dialog is open: the person decides, nothing is sent meanwhile
  var NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;

  // -- values of the sheet's fields ------------------------------------------------------------
  function canon(text) {
    var t = String(text == null ? "" : text).trim();
    var n = t.replace(",", ".");
    return NUMBER.test(n) ? String(Number(n)) : t;
  }
  function same(a, b) { return canon(a) === canon(b); }
  function stored(path) { return saved[path] === undefined ? "" : saved[path]; }
  function controls(path) { return form.querySelectorAll('[name="r.' + path + '"]'); }
  function enabled(path) {
    var els = controls(path);
    for (var i = 0; i < els.length; i++) if (!els[i].disabled) return true;
    return false;
  }
  function read(path) {
    var els = controls(path);
    for (var i = 0; i < els.length; i++) {
      var el = els[i];
      if (el.type === "radio") { if (el.checked) return el.value; }
      else if (el.type === "checkbox") return el.checked ? "true" : "";
      else return el.value;
    }
    return "";
  }
  function write(path, text) {
    var els = controls(path);
    for (var i = 0; i < els.length; i++) {
      var el = els[i];
      if (el.type === "radio") el.checked = same(el.value, text) && text !== "";
      else if (el.type === "checkbox") el.checked = text === "true";
      else el.value = text;
    }
  }
  function dom(path) { return "r-" + path.replace(/\./g, "-"); }
  function wrapper(path) { return form.querySelector('.field[data-path="' + path + '"]'); }

  // -- this tablet's storage ---------------------------------------------------------------------
  function loadStore() {
    try { return JSON.parse(localStorage.getItem(storeKey) || "{}").fields || {}; } catch (e) { return {}; }
  }
  function persist() {
    try {
      var kept = loadStore(); // another tab on this test may have written its own fields
      Object.keys(touched).forEach(function (p) {
        if (pending[p]) kept[p] = pending[p]; else delete kept[p];
      });
      touched = {};
      var label = form.dataset.label || "";
      if (Object.keys(kept).length) localStorage.setItem(storeKey, JSON.stringify({ typist: me, label: label, fields: kept }));
      else localStorage.removeItem(storeKey);
    } catch (e) { /* storage full or refused: the values stay on the screen */ }
  }
  function keep(path, entry) {
    if (entry) pending[path] = entry; else delete pending[path];
    touched[path] = true;
  }

  // -- rows, choices ------------------------------------------------------------------------------
  function addRow(part) {
    var rows = part.querySelectorAll(".reading-row");
    var max = Number(part.dataset.max || 0);
    if (!rows.length || rows.length >= max) return false;
    var last = rows[rows.length - 1];
    var i = Number(last.dataset.index), j = i + 1;
    var base = part.dataset.rows, dash = base.replace(/\./g, "-");
    var row = last.cloneNode(true);
    var idRe = new RegExp("(^|-)" + dash + "-" + i + "(-|$)");
    function swap(el, attr, from, to) {
      var v = el.getAttribute(attr);
      if (v !== null) el.setAttribute(attr, v.split(from).join(to));
    }
    row.dataset.index = String(j);
    [row].concat(Array.prototype.slice.call(row.querySelectorAll("*"))).forEach(function (el) {
      swap(el, "name", "r." + base + "." + i + ".", "r." + base + "." + j + ".");
      swap(el, "name", "f." + base + "." + i + ".", "f." + base + "." + j + ".");
      swap(el, "data-path", base + "." + i + ".", base + "." + j + ".");
      ["id", "for", "aria-describedby"].forEach(function (attr) {
        var v = el.getAttribute(attr);
        if (v !== null) el.setAttribute(attr, v.split(" ").map(function (w) {
          return w.replace(idRe, "$1" + dash + "-" + j + "$2");
        }).join(" "));
      });
    });
    row.querySelectorAll("input").forEach(function (el) {
      if (el.type === "radio" || el.type === "checkbox") el.checked = false;
      else if (el.type !== "hidden") el.value = "";
      el.removeAttribute("aria-invalid");
    });
    row.querySelectorAll(".field-error").forEach(function (el) { el.textContent = ""; el.dataset.kind = ""; });
    row.querySelectorAll(".row-out").forEach(function (el) { el.textContent = ""; });
    row.querySelectorAll(".conflict").forEach(function (el) { el.remove(); });
    row.querySelectorAll("[data-state]").forEach(function (el) { el.removeAttribute("data-state"); });
    var no = row.querySelector(".row-no");
    if (no) no.textContent = String(j + 1);
    last.parentNode.appendChild(row);
    var button = part.querySelector("[data-add-row]");
    if (button && rows.length + 1 >= max) button.hidden = true;
    return true;
  }
  function ensureRow(path) {
    if (controls(path).length) return;
    var parts = form.querySelectorAll("fieldset[data-rows]");
    for (var k = 0; k < parts.length; k++) {
      var base = parts[k].dataset.rows + ".";
      if (path.indexOf(base) !== 0) continue;
      var index = Number(path.slice(base.length).split(".")[0]);
      while (!controls(path).length && parts[k].querySelectorAll(".reading-row").length <= index) {
        if (!addRow(parts[k])) return;
      }
    }
  }
  function applyWhen() {
    form.querySelectorAll("[data-when]").forEach(function (el) {
      var chosen = canon(read(el.dataset.when));
      var show = el.dataset.whenIn.split(" ").some(function (v) { return canon(v) === chosen; });
      el.hidden = !show;
      if (el.tagName === "FIELDSET") el.disabled = !show;
      else el.querySelectorAll("input").forEach(function (i) { i.disabled = !show; });
    });
  }

  // -- what is typed ------------------------------------------------------------------------------
  function note(path) {
    var value = read(path);
    var e = pending[path];
    var now = new Date().toISOString(); // this tablet's clock; the server allows for its error
    if (e && e.state === "conflict") { e.value = value; e.typed_at = now; keep(path, e); }
    else if (same(value, stored(path))) keep(path, null);
    else keep(path, { value: value, base: e ? e.base : stored(path), seq: ++seq, state: "typed", typed_at: now });
    persist();
  }
  function onEdit(ev) {
    var el = ev.target;
    if (!el.name || el.name.indexOf("r.") !== 0) return;
    if (el.type === "radio") applyWhen();
    var row = el.closest(".reading-row");
    if (row && el.value !== "" && !row.nextElementSibling) addRow(row.closest("fieldset[data-rows]"));
    note(el.name.slice(2));
    paint();
    schedulePreview(350);
  }
  function schedulePreview(ms) {
    clearTimeout(previewTimer);
    previewTimer = setTimeout(function () {
      if (window.htmx) window.htmx.trigger(form, "cb-preview");
      else autosave();
    }, ms);
  }

  // -- sending ------------------------------------------------------------------------------------
  function outstanding() {
    return Object.keys(pending).filter(function (p) { return enabled(p); });
  }
  function sendable() {
    return outstanding().filter(function (p) {
      var e = pending[p];
      if (e.state === "conflict") return false;
      if (snapshot && snapshot[p] !== undefined && !same(snapshot[p], read(p))) return false;
      var err = document.getElementById("err-" + dom(p));
      return !(err && err.dataset.kind === "invalid");
    }).sort(function (a, b) { return pending[a].seq - pending[b].seq; })
      .map(function (p) { return { path: p, value: read(p), base: pending[p].base, typed_at: pending[p].typed_at }; });
  }
  function autosave() {
    if (locked || held || Date.now() < notBefore) return settle();
    if (sending) { again = true; return; }
    var list = sendable();
    var sig = JSON.stringify(list);
    if (!list.length || sig === lastRefused) return settle();
    sending = true;
    paint();
    fetch(form.dataset.fields, {
      method: "POST",
      credentials: "same-origin",
      headers: { "Content-Type": "application/json", "X-CSRF-Token": csrf, "HX-Request": "true" },
      body: JSON.stringify({ typed_by: me.id, sent_at: new Date().toISOString(), changes: list })
    }).then(function (res) {
      return res.json().catch(function () { return {}; }).then(function (body) {
        setOnline(true);
        if (LATER[res.status]) { busy = true; retryLater(retryAfter(res.headers.get("Retry-After"))); return; }
        calm();
        answer(res.status, body, list, sig);
      });
    }, lost).then(function () {
      sending = false;
      if (again) { again = false; autosave(); } else settle();
    });
  }
  function answer(status, body, list, sig) {
    if (status === 200) {
      problem = "";
      lastRefused = "";
      versionInput.value = body.version;
      var sent = {};
      list.forEach(function (x) { sent[x.path] = x; });
      var elsewhere = false;
      Object.keys(body.values || {}).forEach(function (p) {
        var text = body.values[p];
        if (sent[p]) {
          saved[p] = text;
          var e = pending[p];
          if (e && same(read(p), sent[p].value)) keep(p, null);
          else if (e) { e.base = text; keep(p, e); }
          return;
        }
        if (pending[p] || same(stored(p), text)) return;
        var active = document.activeElement;
        if (active && active.name === "r." + p) return; // being typed in: keep what was seen
        if (text !== "") ensureRow(p);
        saved[p] = text;
        write(p, text);
        elsewhere = true;
      });
      persist();
      if (elsewhere) { applyWhen(); schedulePreview(50); }
      again = outstanding().length > 0 && sendable().length > 0;
    } else if (status === 409 && body.conflicts) {
      body.conflicts.forEach(function (c) {
        var e = pending[c.path];
        if (!e) return;
        e.state = "conflict";
        e.theirs = c.theirs;
        keep(c.path, e);
      });
      persist();
      again = true; // the other fields of the batch go on their own
    } else if (status === 409) {
      locked = body.detail || "this test can no longer be changed here";
    } else if (status === 422) {
      lastRefused = sig;
      problem = (body.errors && body.errors.length ? body.errors[0].message : body.detail) || "a value was refused";
    } else if (status === 401 || status === 403) {
      problem = "you are signed out: sign in again in another tab; the values typed are kept on this tablet";
      lastRefused = sig;
    } else {
      problem = "the server could not save (error " + status + "); the values typed are kept on this tablet";
      lastRefused = sig;
    }
  }
  function settle() {
    paint();
    if (sending || again) return;
    var done = waiters;
    waiters = [];
    done.forEach(function (cb) { cb(online && !locked && outstanding().length === 0); });
  }
  function flush(cb) {
    waiters.push(cb);
    lastRefused = "";
    notBefore = 0; // asked for now: the person does not wait for the backoff
    schedulePreview(0);
  }
  function setOnline(up) {
    if (online === up) return;
    online = up;
    if (up) calm(); // the connection is back: what waits is sent now, not after the backoff
    paint();
  }

  // -- trying again later ---------------------------------------------------------------------
  // No connection, or a busy server: nothing is dropped, it stays kept here and is sent again
  // after the server's Retry-After, or after 1, 2, 4 ... 15 s in a row of failed tries, give or
  // take a quarter, so that the tablets of a laboratory do not all come back at the same moment.
  function retryAfter(header) {
    var text = String(header || "").trim(); // delay-seconds or an HTTP date (RFC 9110 section 10.2.3)
    if (/^\d+$/.test(text)) return Number(text);
    var at = Date.parse(text);
    return isNaN(at) ? 0 : Math.max(0, (at - Date.now()) / 1000);
  }
  function retryLater(seconds) {
    failures += 1;
    var wait = Math.min(15000, 1000 * Math.pow(2, failures - 1)) * (0.75 + Math.random() * 0.5);
    wait = Math.max(wait, seconds * 1000);
    notBefore = Date.now() + wait;
    clearTimeout(retryTimer);
    retryTimer = setTimeout(function () { retryTimer = null; notBefore = 0; schedulePreview(0); }, wait);
    paint();
  }
  function lost() {
    setOnline(false);
    retryLater(0);
  }
  function calm() {
    busy = false;
    failures = 0;
    notBefore = 0;
    clearTimeout(retryTimer);
    retryTimer = null;
  }

  // -- conflicts ------------------------------------------------------------------------------------
  function conflictBox(path, e) {
    var box = document.createElement("div");
    box.className = "conflict";
    box.setAttribute("role", "alert");
    var p = document.createElement("p");
    var head = document.createElement("b");
    head.textContent = "⚠ Another device changed this field. ";
    p.appendChild(head);
    p.appendChild(document.createTextNode("Saved there: "));
    var theirs = document.createElement("b");
    theirs.className = "theirs";
    theirs.textContent = e.theirs === "" ? "(empty)" : e.theirs;
    p.appendChild(theirs);
    p.appendChild(document.createTextNode(" · yours: "));
    var yours = document.createElement("b");
    yours.className = "yours";
    yours.textContent = e.value === "" ? "(empty)" : e.value;
    p.appendChild(yours);
    box.appendChild(p);
    [["mine", "Keep mine", ""], ["theirs", "Take theirs", "quiet"]].forEach(function (b) {
      var button = document.createElement("button");
      button.type = "button";
      button.className = b[2];
      button.dataset.keep = b[0];
      button.dataset.path = path;
      button.textContent = b[1];
      box.appendChild(button);
    });
    return box;
  }
  function resolve(path, choice) {
    var e = pending[path];
    if (!e) return;
    if (choice === "theirs") {
      saved[path] = e.theirs;
      write(path, e.theirs);
      keep(path, null);
      applyWhen();
    } else {
      keep(path, { value: read(path), base: e.theirs, seq: e.seq, state: "typed", typed_at: e.typed_at });
    }
    lastRefused = "";
    persist();
    paint();
    schedulePreview(0);
  }

  // -- what the page says ------------------------------------------------------------------------
  function paint() {
    form.querySelectorAll(".field[data-state]").forEach(function (el) {
      if (!pending[el.dataset.path]) el.removeAttribute("data-state");
    });
    form.querySelectorAll(".conflict").forEach(function (el) {
      var e = pending[el.parentNode.dataset.path];
      if (!e || e.state !== "conflict") el.remove();
    });
    Object.keys(pending).forEach(function (p) {
      var w = wrapper(p);
      if (!w) return;
      var e = pending[p];
      w.setAttribute("data-state", e.state === "conflict" ? "conflict" : "unsaved");
      var box = w.querySelector(".conflict");
      var sig = e.theirs + "\u0000" + e.value;
      if (e.state === "conflict" && (!box || box.dataset.sig !== sig)) {
        var fresh = conflictBox(p, e);
        fresh.dataset.sig = sig;
        if (box) box.replaceWith(fresh); else w.appendChild(fresh);
      }
    });
    var kept = outstanding().length;
    var invalid = outstanding().filter(function (p) {
      var err = document.getElementById("err-" + dom(p));
      return err && err.dataset.kind === "invalid";
    }).length;
    var conflicts = Object.keys(pending).filter(function (p) { return pending[p].state === "conflict"; }).length;
    if (banner) {
      banner.hidden = online;
      banner.textContent = online ? "" : "⚠ No connection: " + kept + " value" + (kept === 1 ? "" : "s") +
        " kept on this tablet, they will be sent when the connection returns.";
    }
    var text, state;
    if (locked) { text = "✖ Not saved: " + locked + ". The values typed are kept on this tablet."; state = "locked"; }
    else if (conflicts) { text = "⚠ " + conflicts + " field" + (conflicts === 1 ? "" : "s") + " changed on another device: choose which value to keep."; state = "conflict"; }
    else if (sending) { text = "… Saving."; state = "saving"; }
    else if (!kept) { text = "✔ Every value on this sheet is saved."; state = "saved"; }
    else if (!online) { text = "✎ " + kept + " value" + (kept === 1 ? "" : "s") + " waiting for the connection."; state = "offline"; }
    else if (busy) {
      text = "⧗ The server is busy — will retry: " + kept + " value" + (kept === 1 ? " is" : "s are") +
        " kept on this tablet and sent in a moment.";
      state = "busy";
    }
    // typed and about to be sent (the live results come first): saving, not "not saved"
    else if (!problem && !invalid) { text = "… Saving."; state = "saving"; }
    else {
      text = "✎ " + kept + " value" + (kept === 1 ? " is" : "s are") + " not saved yet" +
        (problem ? ": " + problem : ": correct the values marked ✖") + ".";
      state = "unsaved";
    }
    if (stateLine) { stateLine.textContent = text; stateLine.dataset.state = state; }
  }

  // -- wiring ----------------------------------------------------------------------------------
  form.addEventListener("input", onEdit);
  form.addEventListener("change", onEdit);
  form.addEventListener("click", function (ev) {
    var t = ev.target.closest ? ev.target.closest("button") : null;
    if (!t) return;
    if (t.dataset.keep) resolve(t.dataset.path, t.dataset.keep);
    else if (t.hasAttribute("data-add-row")) {
      var part = t.closest("fieldset[data-rows]");
      if (addRow(part)) {
        var rows = part.querySelectorAll(".reading-row");
        var first = rows[rows.length - 1].querySelector("input:not([type=hidden])");
        if (first) first.focus();
      }
    }
  });
  form.addEventListener("submit", function (ev) {
    var button = ev.submitter;
    ev.preventDefault();
    var handIn = button && button.value === "submit";
    if (stateLine) { stateLine.textContent = "… Saving."; stateLine.dataset.state = "saving"; }
    if (atButton) atButton.textContent = "";
    flush(function (ok) {
      if (!ok) {
        paint();
        if (stateLine) stateLine.textContent += handIn ? " Not handed in." : "";
        if (atButton && stateLine) {
          atButton.textContent = (handIn ? "✖ Not handed in: " : "✖ Draft not saved: ") +
            stateLine.textContent.replace(/^\S+\s/, "").replace(/ Not handed in\.$/, "");
        }
        return;
      }
      if (!handIn) return;
      var post = document.createElement("form");
      post.method = "post";
      post.action = form.action;
      var sent = [["csrf_token", csrf], ["version", versionInput.value], ["then", "submit"], ["autosaved", "1"]];
      // the reasons typed for error remarks go with the hand-in ("reason.<flag code>")
      form.querySelectorAll('[name^="reason."]').forEach(function (el) { sent.push([el.name, el.value]); });
      sent.forEach(function (f) {
        var i = document.createElement("input");
        i.type = "hidden"; i.name = f[0]; i.value = f[1];
        post.appendChild(i);
      });
      document.body.appendChild(post);
      post.submit();
    });
  });
  document.body.addEventListener("htmx:configRequest", function (ev) {
    if (ev.detail.elt !== form) return;
    snapshot = {};
    Object.keys(pending).forEach(function (p) { snapshot[p] = read(p); });
  });
  document.body.addEventListener("htmx:afterRequest", function (ev) {
    if (ev.detail.elt !== form || !ev.detail.successful) return;
    setOnline(true);
    form.querySelectorAll(".field-error").forEach(function (err) {
      var input = document.getElementById(err.id.replace(/^err-/, "in-"));
      if (input) {
        if (err.dataset.kind === "invalid") input.setAttribute("aria-invalid", "true");
        else input.removeAttribute("aria-invalid");
      }
    });
    autosave();
  });
  document.body.addEventListener("htmx:sendError", function (ev) {
    if (ev.detail.elt !== form) return;
    lost();
    settle();
  });
  document.body.addEventListener("htmx:responseError", function (ev) {
    if (ev.detail.elt !== form) return;
    var xhr = ev.detail.xhr;
    setOnline(true);
    if (LATER[xhr.status]) { busy = true; retryLater(retryAfter(xhr.getResponseHeader("Retry-After"))); }
    else problem = "the live results could not be computed (error " + xhr.status + ")";
    settle();
  });
  window.addEventListener("online", function () { schedulePreview(0); });
  window.addEventListener("offline", lost);
  document.addEventListener("cb-hold", function (ev) {
    held = !!(ev.detail && ev.detail.hold);
    if (!held) { lastRefused = ""; schedulePreview(0); }
  });
  document.addEventListener("cb-send-now", function (ev) {
    ev.detail.handled = true;
    held = false;
    flush(ev.detail.done);
  });

  // Put back what this tablet kept for this test: typed values not saved yet, and conflicts.
  var kept = loadStore();
  Object.keys(kept).forEach(function (p) {
    var e = kept[p];
    seq = Math.max(seq, e.seq || 0);
    ensureRow(p);
    if (!controls(p).length) return;
    var now = stored(p);
    if (same(e.value, now)) { keep(p, null); return; }
    if (e.state === "conflict" || !same(e.base, now)) { e.state = "conflict"; e.theirs = now; }
    write(p, e.value);
    keep(p, e);
  });
  persist();
  applyWhen();
  paint();
  if (Object.keys(pending).length) schedulePreview(0);
  showOthers();

  // -- entries other people left on this tablet -----------------------------------------------------
  // Never sent from here and never put into the inputs: only their typist can send them, signed in
  // as themselves. The person here may discard them with a reason, which the server records (with
  // the values and the typist) before they are removed from this tablet.
  function othersKept() {
    var groups = [];
    try {
      for (var i = 0; i < localStorage.length; i++) {
        var key = localStorage.key(i);
        if (!key || key === storeKey || key.indexOf(storePrefix) !== 0) continue;
        var rest = key.slice(storePrefix.length); // ".u<id>", or "" for the key of entries kept
        var legacy = rest === "";                 // before they carried their typist
        if (!legacy && !/^\.u\d+$/.test(rest)) continue;
        var data = JSON.parse(localStorage.getItem(key) || "{}");
        var fields = data.fields || {};
        if (!Object.keys(fields).length) continue;
        var typist = legacy ? null : data.typist || { id: Number(key.slice(storePrefix.length + 2)) };
        groups.push({ key: key, typist: typist, fields: fields });
      }
    } catch (e) { /* storage refused: nothing to show */ }
    return groups;
  }
  function whoTyped(typist) {
    if (!typist) return "a person this tablet did not record";
    return typist.name || typist.username || "user " + typist.id;
  }
  function showOthers() {
    var box = document.getElementById("kept-others");
    if (!box) return;
    var groups = othersKept();
    box.textContent = "";
    box.hidden = !groups.length;
    groups.forEach(function (g) { box.appendChild(otherGroup(g)); });
  }
  function otherGroup(g) {
    var n = Object.keys(g.fields).length;
    var who = whoTyped(g.typist);
    var part = document.createElement("div");
    part.className = "problem kept-other";
    var p = document.createElement("p");
    p.textContent = "⚠ " + n + " entr" + (n === 1 ? "y" : "ies") + " typed by " + who +
      " wait on this tablet; only they can send them, signed in as themselves.";
    part.appendChild(p);
    var open = document.createElement("button");
    open.type = "button";
    open.className = "quiet";
    open.textContent = "Discard them…";
    part.appendChild(open);
    var ask = document.createElement("form");
    ask.hidden = true;
    ask.noValidate = true;
    var id = "discard-reason-" + g.key.replace(/[^A-Za-z0-9]/g, "-");
    var label = document.createElement("label");
    label.htmlFor = id;
    label.textContent = "Why discard the entries typed by " + who + "? (recorded in the audit trail with the values)";
    var reason = document.createElement("input");
    reason.id = id;
    reason.type = "text";
    reason.maxLength = 1000;
    var say = document.createElement("p");
    say.setAttribute("role", "status");
    var row = document.createElement("div");
    row.className = "actions";
    var go = document.createElement("button");
    go.type = "submit";
    go.textContent = "Discard the entries";
    var back = document.createElement("button");
    back.type = "button";
    back.className = "quiet";
    back.textContent = "Keep them";
    row.appendChild(go);
    row.appendChild(back);
    [label, reason, row, say].forEach(function (el) { ask.appendChild(el); });
    part.appendChild(ask);
    open.addEventListener("click", function () { ask.hidden = false; open.hidden = true; reason.focus(); });
    back.addEventListener("click", function () { ask.hidden = true; open.hidden = false; say.textContent = ""; });
    ask.addEventListener("submit", function (ev) {
      ev.preventDefault();
      if (!reason.value.trim()) { say.textContent = "✖ Say why: the reason is recorded with the discarded values."; reason.focus(); return; }
      var entries = Object.keys(g.fields).map(function (path) {
        return { path: path, value: String(g.fields[path].value == null ? "" : g.fields[path].value), typed_at: g.fields[path].typed_at };
      });
      go.disabled = true;
      fetch(form.dataset.discard, {
        method: "POST",
        credentials: "same-origin",
        headers: { "Content-Type": "application/json", "X-CSRF-Token": csrf },
        body: JSON.stringify({ typed_by: g.typist ? g.typist.id : null, reason: reason.value, entries: entries })
      }).then(function (res) {
        return res.json().catch(function () { return {}; }).then(function (body) {
          go.disabled = false;
          if (!res.ok) { say.textContent = "✖ Not discarded: " + (body.detail || "error " + res.status) + "."; return; }
          try { localStorage.removeItem(g.key); } catch (e) { /* the record is written; the page says so */ }
          part.textContent = "";
          part.className = "notice kept-other";
          var done = document.createElement("p");
          done.textContent = "✔ The " + n + " entr" + (n === 1 ? "y" : "ies") + " typed by " + who +
            " were discarded; the reason is recorded in this test's audit trail.";
          part.appendChild(done);
        });
      }, function () {
        go.disabled = false;
        say.textContent = "✖ No connection: the entries stay on this tablet until the discard can be recorded.";
      });
    });
    return part;
  }
})();

// Registers at the bench: a tin number fills its empty mass, an instrument number its calibration
// due date and state, both from the laboratory's registers (server/web/registers.py).
(function () {
  "use strict";
  var form = document.getElementById("sheet");
  if (!form || !form.dataset.test) return;

  function field(name) { return form.querySelector('[name="' + name + '"]'); }
  function say(input, text) {
    var slot = input.parentNode.querySelector(".register-note");
    if (!slot) {
      slot = document.createElement("span");
      slot.className = "register-note";
      slot.setAttribute("role", "status");
      input.parentNode.appendChild(slot);
    }
    slot.textContent = text;
  }
  function fill(target, value) {
    if (!target || target.value === String(value)) return;
    target.value = value;
    target.dispatchEvent(new Event("input", { bubbles: true }));
  }
  function lookUp(url, input, done) {
    fetch(url, { headers: { Accept: "application/json" }, credentials: "same-origin" })
      .then(function (res) {
        return res.json().then(function (body) { return { ok: res.ok, body: body }; });
      })
      .then(function (r) { if (r.ok) done(r.body); else say(input, "✖ " + (r.body.detail || "not in the register")); },
            function () { say(input, "no connection: type the value from the tin or the label"); });
  }
  function fromRegister(el, onlyEmpty) {
    var name = el.name || "";
    var code = el.value.trim();
    if (!code) return;
    var base = name.slice(0, name.lastIndexOf("."));
    if (/\.container$/.test(name)) {
      if (onlyEmpty && field(base + ".tare_g") && field(base + ".tare_g").value.trim()) return;
      lookUp("/registers/containers/" + encodeURIComponent(code), el, function (tin) {
        fill(field(base + ".tare_g"), tin.tare_g);
        say(el, tin.active ? "✔ tare " + tin.tare_g + " g from the register" : "⚠ tin taken out of use");
      });
    } else if (/^r\.(.+\.)?equipment\.\d+\.id$/.test(name)) {
      if (onlyEmpty && field(base + ".calibration_due") && field(base + ".calibration_due").value.trim()) return;
      lookUp("/registers/equipment/" + encodeURIComponent(code), el, function (item) {
        fill(field(base + ".calibration_due"), item.calibration_due || "");
        var capacity = item.reading && item.reading.capacity_g;
        if (capacity) fill(field(base + ".capacity_g"), capacity);
        var mark = item.state === "past due" ? "✖ " : item.state === "in calibration" ? "✔ " : "⚠ ";
        say(el, mark + item.state + (item.calibration_due ? " (due " + item.calibration_due + ")" : ""));
      });
    }
  }
  form.addEventListener("change", function (ev) { fromRegister(ev.target, false); });
  // A number already there when the page opens (put back from this tablet after a reload, or
  // saved while the register could not be reached) fills what is still empty beside it.
  form.querySelectorAll('input[name$=".container"], input[name$=".id"]').forEach(function (el) {
    if (!el.disabled && !el.readOnly) fromRegister(el, true);
  });
})();

/* Claybench: the values a tablet keeps belong to the person who typed them (see static/bench.js).
 *
 * - Signing out with values of one's own not sent yet opens a dialog: send them now, keep them on
 *   this tablet (bound to this person, sent when they sign in here again; nobody else can send
 *   them), or cancel. While it is open the bench sheet sends nothing behind it.
 * - On every page, a line says which kept values wait on this tablet: one's own (with the sheet
 *   that sends them) and other people's (only they can send them; the sheet offers to discard them
 *   with a reason). The sheet itself shows its own test's values, so they are left out here.
 * Loaded from base.html for a signed-in person; the script element carries who that is.
 * Our own code, no dependencies.
 */
(function () {
  "use strict";
  var self = document.querySelector("script[data-signed-in]");
  var signout = document.querySelector('form[action="/signout"]');
  if (!self || !signout) return;
  var me = { id: Number(self.dataset.signedIn), name: self.dataset.userName || self.dataset.username || "" };
  var KEY = /^claybench\.bench\.(\d+)(?:\.u(\d+))?$/;
  var sheet = document.getElementById("sheet");
  var here = sheet && sheet.dataset.test ? sheet.dataset.test : "";

  function plural(n) { return n + " entr" + (n === 1 ? "y" : "ies"); }

  // Every test with kept values on this tablet: {test, typist ({id, name} or null), label, count}.
  function kept() {
    var out = [];
    try {
      for (var i = 0; i < localStorage.length; i++) {
        var key = localStorage.key(i);
        var m = key ? KEY.exec(key) : null;
        if (!m) continue;
        var data = JSON.parse(localStorage.getItem(key) || "{}");
        var count = Object.keys(data.fields || {}).length;
        if (!count) continue;
        var typist = m[2] ? data.typist || { id: Number(m[2]) } : null; // no id: kept before ids
        if (typist) typist.id = Number(m[2]); // the key decides whose they are, not what it holds
        out.push({ test: m[1], typist: typist, label: data.label || "test " + m[1], count: count });
      }
    } catch (e) { /* storage refused: nothing kept */ }
    return out;
  }
  function mine(list) { return list.filter(function (k) { return k.typist && k.typist.id === me.id; }); }
  function total(list) { return list.reduce(function (n, k) { return n + k.count; }, 0); }
  function sheetLink(k) {
    var a = document.createElement("a");
    a.href = "/tests/" + k.test;
    a.textContent = k.label;
    return a;
  }

  // -- a line on every page: what waits on this tablet ----------------------------------------------
  function showWaiting() {
    var list = kept().filter(function (k) { return k.test !== here; });
    var main = document.getElementById("main");
    if (!list.length || !main) return;
    var box = document.createElement("div");
    box.id = "kept-on-tablet";
    box.className = "problem";
    box.setAttribute("role", "status");
    var own = mine(list);
    if (own.length) {
      var p = document.createElement("p");
      p.appendChild(document.createTextNode("✎ " + plural(total(own)) + " you typed wait on this tablet; open the sheet to send them: "));
      own.forEach(function (k, i) { if (i) p.appendChild(document.createTextNode(", ")); p.appendChild(sheetLink(k)); });
      box.appendChild(p);
    }
    list.filter(function (k) { return own.indexOf(k) < 0; }).forEach(function (k) {
      var q = document.createElement("p");
      var who = k.typist ? k.typist.name || k.typist.username || "user " + k.typist.id : "a person this tablet did not record";
      q.appendChild(document.createTextNode("⚠ " + plural(k.count) + " typed by " + who +
        " wait on this tablet; only they can send them. To discard them, open "));
      q.appendChild(sheetLink(k));
      q.appendChild(document.createTextNode("."));
      box.appendChild(q);
    });
    main.insertBefore(box, main.firstChild);
  }

  // -- the sign-out dialog --------------------------------------------------------------------------
  var dialog = null, text = null, list = null, say = null, sendButton = null;

  function hold(on) { document.dispatchEvent(new CustomEvent("cb-hold", { detail: { hold: on } })); }
  function button(label, choice, quiet) {
    var b = document.createElement("button");
    b.type = "button";
    b.textContent = label;
    b.dataset.choice = choice;
    if (quiet) b.className = "quiet";
    return b;
  }
  function build() {
    dialog = document.createElement("dialog");
    dialog.id = "signout-dialog";
    dialog.setAttribute("aria-labelledby", "signout-title");
    var h = document.createElement("h2");
    h.id = "signout-title";
    text = document.createElement("p");
    text.textContent = "They stay bound to you: if you keep them, they are sent when you sign in on this tablet " +
      "again, and nobody else can send them.";
    list = document.createElement("ul");
    say = document.createElement("p");
    say.setAttribute("role", "status");
    var row = document.createElement("div");
    row.className = "actions";
    sendButton = button("Send now", "send", false);
    row.appendChild(sendButton);
    row.appendChild(button("Keep them on this tablet and sign out", "keep", true));
    row.appendChild(button("Cancel", "cancel", true));
    [h, text, list, say, row].forEach(function (el) { dialog.appendChild(el); });
    document.body.appendChild(dialog);
    row.addEventListener("click", function (ev) {
      var b = ev.target.closest ? ev.target.closest("button") : null;
      if (b && b.dataset.choice) choose(b.dataset.choice);
    });
    dialog.addEventListener("cancel", function () { hold(false); }); // the Escape key
  }
  function fill(own) {
    dialog.querySelector("h2").textContent = plural(total(own)) + (total(own) === 1 ? " is" : " are") + " not sent yet";
    list.textContent = "";
    own.forEach(function (k) {
      var li = document.createElement("li");
      li.appendChild(sheetLink(k));
      li.appendChild(document.createTextNode(": " + plural(k.count)));
      list.appendChild(li);
    });
    var onSheet = own.some(function (k) { return k.test === here; });
    sendButton.textContent = onSheet ? "Send now" : "Open the sheet to send them";
  }
  function leave() {
    // fetch rather than the form itself: without a connection the page stays, and says so
    fetch(signout.action, {
      method: "POST",
      credentials: "same-origin",
      headers: { "Content-Type": "application/x-www-form-urlencoded" },
      body: new URLSearchParams(new FormData(signout))
    }).then(function (res) {
      if (res.ok) window.location.assign(res.redirected ? res.url : "/signin");
      else say.textContent = "✖ Not signed out (error " + res.status + "): reload the page and try again.";
    }, function () {
      say.textContent = "✖ No connection: signing out needs the server. You are still signed in; " +
        "your entries stay on this tablet, bound to you.";
    });
  }
  function choose(choice) {
    say.textContent = "";
    if (choice === "cancel") { dialog.close(); hold(false); return; }
    if (choice === "keep") { leave(); return; }
    var own = mine(kept());
    var there = own.filter(function (k) { return k.test === here; });
    if (!there.length) { if (own.length) window.location.assign("/tests/" + own[0].test); return; }
    say.textContent = "… Sending.";
    var ask = { handled: false, done: function (ok) {
      var left = mine(kept());
      if (!left.length) { say.textContent = "✔ Sent. Signing out."; leave(); return; }
      hold(true); // the sheet sent what it could: it waits again while the person decides
      fill(left);
      say.textContent = ok ? "✔ This sheet's entries are sent; the others are on their own sheets."
        : "✖ Not all sent (no connection, or values to correct on the sheet): keep them, or cancel and look.";
    } };
    document.dispatchEvent(new CustomEvent("cb-send-now", { detail: ask }));
    if (!ask.handled) window.location.assign("/tests/" + there[0].test);
  }

  signout.addEventListener("submit", function (ev) {
    var own = mine(kept());
    if (!own.length) return; // nothing of this person's waits: sign out as usual
    ev.preventDefault();
    hold(true);
    if (!dialog) build();
    fill(own);
    say.textContent = navigator.onLine ? "" : "There is no connection now.";
    dialog.showModal();
  });

  showWaiting();
})();

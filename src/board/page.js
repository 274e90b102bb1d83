"use strict";
// The planning board's page: sends each change to the board, and draws
// the answer (the plan's tests, what moved, the report's calendar). Every
// plan is made on the server; this script holds no planning rules. It
// talks only to the server it came from, with the token from its address.
(function () {
  const token = new URLSearchParams(location.search).get("token") || "";
  const $ = (id) => document.getElementById(id);
  let latest = -1;
  let pending = 0;

  function el(tag, attrs, ...children) {
    const e = document.createElement(tag);
    for (const [k, v] of Object.entries(attrs || {})) {
      if (v === null || v === undefined || v === false) continue;
      if (k === "class") e.className = v;
      else if (k === "text") e.textContent = v;
      else e.setAttribute(k, v === true ? "" : String(v));
    }
    for (const c of children) {
      if (c === null || c === undefined) continue;
      e.append(c instanceof Node ? c : document.createTextNode(String(c)));
    }
    return e;
  }

  function say(text, isError) {
    const s = $("status");
    s.textContent = text;
    s.classList.toggle("error", !!isError);
  }

  async function call(method, path, body) {
    const init = { method, headers: { "X-Sluice-Token": token } };
    if (body !== undefined) {
      init.headers["Content-Type"] = "application/json";
      init.body = JSON.stringify(body);
    }
    return fetch(path, init);
  }

  // Sends a change and draws the answer; answers for a state a later
  // change replaced are dropped.
  async function change(path, body, what) {
    pending += 1;
    document.body.classList.add("busy");
    say("Planning again: " + what + "…");
    try {
      const r = await call("POST", path, body);
      const v = await r.json();
      if (!r.ok) {
        say(v.error || "the board refused the change", true);
        return;
      }
      if (v.superseded) return;
      draw(v);
      say("Planned again: " + what + ".");
    } catch (e) {
      say("The board did not answer: is `sluice board` still running?", true);
    } finally {
      pending -= 1;
      if (pending === 0) document.body.classList.remove("busy");
    }
  }

  function edit(body, what) {
    return change("/api/edit", body, what);
  }

  const pct = (x) => Math.round(x * 100000) / 1000;
  const frac = (p) => Math.round(p * 10000) / 1000000;

  function when(t) {
    if (t.start) {
      return el("span", { class: "when" },
        el("span", { "data-field": "start", text: t.start }), " → ",
        el("span", { "data-field": "result", text: t.result_date }),
        el("br"), el("span", { "data-field": "share", text: t.share_words || "" }));
    }
    const word = t.left_out ? "left out" : t.status === "unscheduled" ? "does not fit" : t.status;
    return el("span", { class: "when", "data-field": "status", text: word });
  }

  // One small form: its fields, then buttons; `submit(form, button)` acts.
  function form(name, fields, buttons, submit) {
    const f = el("form", { class: "row", "data-edit": name }, ...fields, ...buttons);
    f.addEventListener("submit", (ev) => {
      ev.preventDefault();
      submit(f, ev.submitter);
    });
    return f;
  }

  function field(label, input) {
    return el("label", {}, label, input);
  }

  function testEditor(t) {
    const k = (f) => t.id + ":" + f;
    const keep = el("input", { type: "checkbox", "data-key": k("keep"), checked: !t.left_out });
    keep.addEventListener("change", () =>
      edit({ test: t.id, leave_out: !keep.checked }, t.id + (keep.checked ? " kept in" : " left out")));
    const parts = [el("div", { class: "row" }, el("label", { class: "check" }, keep, "In the plan"))];
    const prio = el("input", { type: "number", step: "any", min: "0", value: t.priority, "data-key": k("priority"), name: "priority" });
    parts.push(form("priority", [field("Priority", prio)], [el("button", { type: "submit", text: "Set" })],
      () => edit({ test: t.id, priority: Number(prio.value) }, t.id + " priority " + prio.value)));
    if (t.sized && t.mde !== null) {
      const mde = el("input", { type: "number", step: "any", min: "0", value: pct(t.mde), "data-key": k("mde"), name: "mde" });
      parts.push(form("mde", [field("MDE, % lift", mde)], [el("button", { type: "submit", text: "Set" })],
        () => edit({ test: t.id, mde: frac(Number(mde.value)) }, t.id + " MDE " + mde.value + "%")));
    }
    const share = el("input", { type: "number", step: "any", min: "0", max: "100", value: pct(t.max_share), "data-key": k("max_share"), name: "max_share" });
    parts.push(form("max_share", [field("Largest share, %", share)], [el("button", { type: "submit", text: "Set" })],
      () => edit({ test: t.id, max_share: frac(Number(share.value)) }, t.id + " largest share " + share.value + "%")));
    for (const [key, label, set, clear] of [
      ["start", "Start on", "Pin", "Unpin"],
      ["earliest_start", "Earliest start", "Set", "Clear"],
      ["deadline", "Deadline", "Set", "Clear"],
    ]) {
      const current = key === "start" ? t.pinned : t[key];
      const day = el("input", { type: "date", value: current || "", "data-key": k(key), name: key,
        min: view.window.start, max: view.window.end });
      parts.push(form(key, [field(label, day)],
        [el("button", { type: "submit", value: "set", text: set }),
         el("button", { type: "submit", value: "clear", text: clear, disabled: !current })],
        (f, button) => {
          const clearing = button && button.value === "clear";
          if (!clearing && !day.value) {
            say("Choose a date first.", true);
            return;
          }
          const value = clearing ? "none" : day.value;
          edit({ test: t.id, [key]: value }, t.id + " " + label.toLowerCase() + " " + (clearing ? "cleared" : value));
        }));
    }
    return el("div", { class: "editor" }, ...parts);
  }

  // Text with `backticked` names shown as code, as the report shows them.
  function worded(cls, text) {
    const parts = text.split("`");
    if (parts.length % 2 === 0) return el("span", { class: cls, text });
    return el("span", { class: cls }, ...parts.map((p, i) => (i % 2 ? el("code", { text: p }) : p)));
  }

  function testItem(t, open) {
    const cls = t.left_out ? "left" : t.start ? "" : "out";
    const sub = [t.title, t.owner, t.pools.join(", ")].filter(Boolean).join(" · ");
    const summary = el("summary", { "data-key": t.id + ":summary" },
      el("span", { class: "id", text: t.id }), when(t),
      el("span", { class: "sub", text: sub }),
      !t.start && t.reason ? worded("why", t.reason) : null,
      !t.start && t.detectable ? el("span", { class: "could", text: t.detectable }) : null);
    const d = el("details", { open: open }, summary, testEditor(t));
    return el("li", { class: cls, "data-test-id": t.id, "data-status": t.status }, d);
  }

  function poolItem(p) {
    const factor = el("input", { type: "number", step: "0.05", min: "0", value: p.scale === null ? 1 : p.scale,
      "data-key": p.id + ":scale", name: "scale" });
    const from = el("input", { type: "date", value: p.from || "", "data-key": p.id + ":from", name: "from",
      min: view.window.start, max: view.window.end });
    const f = form("scale", [field("Traffic ×", factor), field("From", from)],
      [el("button", { type: "submit", text: "Scale" })], () => {
        const body = { pool: p.id, scale: Number(factor.value) };
        if (from.value) body.from = from.value;
        edit(body, p.id + " traffic ×" + factor.value + (from.value ? " from " + from.value : ""));
      });
    return el("li", { "data-pool-id": p.id }, el("p", { class: "name", text: p.label + " (" + p.id + ")" }), f);
  }

  let view = null;

  function applyFilter() {
    const q = $("filter").value.trim().toLowerCase();
    for (const li of $("tests").children) {
      const t = li.textContent.toLowerCase();
      li.hidden = q !== "" && !t.includes(q);
    }
  }

  // The report laid out in the board's column: its page width and
  // margins given up, wide tables scrolled inside their own box.
  const FIT = ".report-body main { max-width: none; padding: 8px 12px 40px; }" +
    ".report-body table { display: block; max-width: 100%; overflow-x: auto; }" +
    ".report-body svg { max-width: 100%; }";

  function drawReport(html) {
    const host = $("report");
    const root = host.shadowRoot || host.attachShadow({ mode: "open" });
    const doc = new DOMParser().parseFromString(html, "text/html");
    const nodes = [];
    for (const s of doc.querySelectorAll("style")) nodes.push(document.importNode(s, true));
    const body = el("div", { class: "report-body" });
    for (const n of Array.from(doc.body.childNodes)) body.appendChild(document.importNode(n, true));
    nodes.push(el("style", { text: FIT }), body);
    root.replaceChildren(...nodes);
  }

  function draw(v) {
    if (v.version < latest) return;
    latest = v.version;
    view = v;
    const focused = document.activeElement && document.activeElement.dataset ? document.activeElement.dataset.key : null;
    const open = new Set(Array.from(document.querySelectorAll("#tests details[open]"))
      .map((d) => d.parentElement.dataset.testId));
    $("plan-name").textContent = v.name + " · " + v.window.start + " to " + v.window.end +
      (v.replan ? " · re-plan from " + v.today : "");
    $("summary").textContent = v.summary;
    $("moved-headline").textContent = v.moved.headline;
    $("moved-list").replaceChildren(...v.moved.rows
      .filter((r) => r[7] && r[7] !== "unchanged" && r[7] !== "still out")
      .map((r) => el("li", { text: r[0] + ": " + r[7] })));
    $("steps").replaceChildren(...v.steps.map((s) => el("li", { text: s })));
    $("no-steps").hidden = v.steps.length > 0;
    $("undo").disabled = !v.can_undo;
    $("redo").disabled = !v.can_redo;
    $("tests").replaceChildren(...v.tests.map((t) => testItem(t, open.has(t.id))));
    $("pools").replaceChildren(...v.pools.map(poolItem));
    $("confidence").value = v.confidence === null ? "none" : String(v.confidence);
    if ($("confidence").value === "") {
      $("confidence").append(el("option", { value: String(v.confidence), text: pct(v.confidence) + "% of traffic paths" }));
      $("confidence").value = String(v.confidence);
    }
    applyFilter();
    drawReport(v.report);
    if (focused) {
      const again = document.querySelector('[data-key="' + CSS.escape(focused) + '"]');
      if (again) again.focus();
    }
    document.body.dataset.version = String(v.version);
  }

  async function load() {
    say("Planning…");
    try {
      const r = await call("GET", "/api/state");
      const v = await r.json();
      if (!r.ok) {
        say(v.error || "the board refused", true);
        return;
      }
      draw(v);
      say("Ready: every change plans again.");
    } catch (e) {
      say("The board did not answer: is `sluice board` still running?", true);
    }
  }

  async function save() {
    try {
      const r = await call("GET", "/api/scenario");
      if (!r.ok) {
        say("The board could not write the scenario.", true);
        return;
      }
      const text = await r.text();
      const url = URL.createObjectURL(new Blob([text], { type: "application/yaml" }));
      const a = el("a", { href: url, download: "scenario.yaml" });
      document.body.append(a);
      a.click();
      a.remove();
      setTimeout(() => URL.revokeObjectURL(url), 10000);
      say("Saved the scenario: run `sluice plan PORTFOLIO --scenario scenario.yaml` for the same plan.");
    } catch (e) {
      say("The board did not answer: is `sluice board` still running?", true);
    }
  }

  $("undo").addEventListener("click", () => change("/api/undo", undefined, "undo"));
  $("redo").addEventListener("click", () => change("/api/redo", undefined, "redo"));
  $("save").addEventListener("click", save);
  $("filter").addEventListener("input", applyFilter);
  $("confidence-form").addEventListener("submit", (ev) => {
    ev.preventDefault();
    const c = $("confidence").value;
    edit({ confidence: c }, c === "none" ? "plan on the forecast" : "plan to " + pct(Number(c)) + "% confidence");
  });
  document.addEventListener("keydown", (ev) => {
    const typing = ev.target instanceof HTMLInputElement || ev.target instanceof HTMLSelectElement;
    if (typing || !(ev.ctrlKey || ev.metaKey) || ev.key.toLowerCase() !== "z") return;
    ev.preventDefault();
    if (ev.shiftKey && view && view.can_redo) change("/api/redo", undefined, "redo");
    else if (!ev.shiftKey && view && view.can_undo) change("/api/undo", undefined, "undo");
  });
  load();
})();

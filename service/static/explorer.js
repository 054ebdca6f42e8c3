// The Sluice explorer: plain JavaScript, no build step.
// Lists the example scenarios, solves the payload on this service, draws the answer
// with POST /v1/diagram.svg and shows the equivalent curl command.
"use strict";

const DRAWN = new Set();  // kinds the diagram endpoint draws: GET /v1/kinds says which
const $ = (id) => document.getElementById(id);

function headers() {
  const h = { "Content-Type": "application/json" };
  const key = $("apikey").value.trim();
  if (key) h["Authorization"] = "Bearer " + key;
  return h;
}

function shellQuote(text) {
  return "'" + text.replace(/'/g, "'\\''") + "'";
}

function compactPayload() {
  try { return JSON.stringify(JSON.parse($("payload").value)); } catch (e) { return null; }
}

function updateCurl() {
  const kind = $("kind").value;
  const body = compactPayload();
  if (!kind || body === null) { $("curl").textContent = "(the payload is not valid JSON yet)"; return; }
  // Double quotes: the shell expands $SLUICE_KEY (the key itself is never shown).
  const auth = $("apikey").value.trim() ? ' -H "Authorization: Bearer $SLUICE_KEY"' : "";
  const base = window.location.origin;
  let text = `curl -s ${base}/v1/${kind} -H 'Content-Type: application/json'${auth} \\\n     -d ${shellQuote(body)}`;
  if (DRAWN.has(kind)) {
    const wrapped = JSON.stringify({ kind: kind, problem: JSON.parse(body) });
    text += `\n\n# the diagram, as SVG\ncurl -s ${base}/v1/diagram.svg -H 'Content-Type: application/json'${auth} \\\n` +
            `     -d ${shellQuote(wrapped)} -o answer.svg`;
  }
  $("curl").textContent = text;
}

function showProblem(doc, where) {
  const box = $("error");
  box.replaceChildren();
  const head = document.createElement("div");
  head.textContent = `${where}: ${doc.status || ""} ${doc.title || "error"} — ${doc.detail || ""}`;
  box.appendChild(head);
  if (Array.isArray(doc.errors) && doc.errors.length) {
    const list = document.createElement("ul");
    for (const e of doc.errors) {
      const item = document.createElement("li");
      const code = document.createElement("code");
      code.textContent = e.pointer || "/";
      item.appendChild(code);
      item.appendChild(document.createTextNode(" " + e.detail));
      list.appendChild(item);
    }
    box.appendChild(list);
  }
  box.hidden = false;
}

function clearAnswer() {
  $("error").hidden = true;
  $("summary").replaceChildren();
  $("tables").replaceChildren();
  $("response").textContent = "";
}

function fact(name, value) {
  if (value === undefined || value === null) return;
  const dt = document.createElement("dt");
  dt.textContent = name;
  const dd = document.createElement("dd");
  dd.textContent = typeof value === "object" ? JSON.stringify(value) : String(value);
  $("summary").append(dt, dd);
}

function plural(count, word) {
  return `${count} ${word}${count === 1 ? "" : "s"}`;
}

function isCacheHit(header) {
  return Boolean(header) && /;\s*hit\b/.test(header);
}

// The Cache-Status header (RFC 9211) of a solve, in words.
function cacheWords(header) {
  if (!header) return null;
  if (isCacheHit(header)) return "hit: answered from the cache, not solved again";
  if (/detail=bypass/.test(header)) return "bypassed: solved without reading or writing the cache";
  if (/fwd=request;\s*stored/.test(header)) return "refreshed: solved again and stored";
  if (/fwd=miss;\s*stored/.test(header)) return "miss: solved now and stored";
  return header;
}

function assignmentTable(doc) {
  const table = document.createElement("table");
  table.id = "assignments";
  const head = table.createTHead().insertRow();
  for (const name of ["agent", "task", "cost"]) {
    const th = document.createElement("th");
    th.textContent = name;
    head.appendChild(th);
  }
  const body = table.createTBody();
  for (const a of doc.assignments) {
    const row = body.insertRow();
    for (const value of [a.agent, a.task, a.cost]) row.insertCell().textContent = String(value);
  }
  const wrap = document.createElement("div");
  wrap.className = "result-table";
  wrap.appendChild(table);
  for (const [label, ids] of [["unassigned agents", doc.unassigned_agents], ["unassigned tasks", doc.unassigned_tasks]]) {
    if (Array.isArray(ids) && ids.length) {
      const note = document.createElement("p");
      note.className = "hint";
      note.textContent = `${label}: ${ids.join(", ")}`;
      wrap.appendChild(note);
    }
  }
  return wrap;
}

function showSummary(kind, doc, cacheStatus) {
  fact("status", doc.status);
  for (const name of ["value", "cost", "total_cost", "objective", "shipped"]) fact(name, doc[name]);
  if (doc.cut) fact("minimum cut", `${plural(doc.cut.arcs.length, "arc")}, capacity ${doc.cut.capacity}`);
  if (Array.isArray(doc.assignments)) fact("assignments", plural(doc.assignments.length, "pair"));
  if (doc.certificate) fact("certificate", doc.certificate.checked ? "checked ✓" : "NOT checked");
  if (doc.engine) fact("engine", `${doc.engine.kind} · ${doc.engine.solver || ""} ${doc.engine.version || ""}`);
  fact("cache", cacheWords(cacheStatus));
  if (doc.timing_ms) {
    const times = `parse ${doc.timing_ms.parse} · solve ${doc.timing_ms.solve} · total ${doc.timing_ms.total}`;
    fact("time (ms)", isCacheHit(cacheStatus) ? `${times} (solve 0: the answer came from the cache)` : times);
  }
  if (doc.digest) fact("digest", doc.digest.slice(0, 23) + "…");
  $("tables").replaceChildren();
  if (Array.isArray(doc.assignments) && doc.assignments.length) $("tables").appendChild(assignmentTable(doc));
}

async function drawDiagram(kind, problem) {
  const box = $("diagram");
  if (!DRAWN.has(kind)) {
    box.innerHTML = '<p class="hint"></p>';
    box.firstChild.textContent = `Diagrams are drawn for ${[...DRAWN].join(" and ") || "no kind"} problems.`;
    return;
  }
  const r = await fetch("/v1/diagram.svg", { method: "POST", headers: headers(),
                                              body: JSON.stringify({ kind: kind, problem: problem }) });
  if (!r.ok) {
    const doc = await r.json();
    box.innerHTML = '<p class="hint"></p>';
    box.firstChild.textContent = r.status === 413 ? "Too large to draw: " + doc.detail : "No diagram: " + doc.detail;
    return;
  }
  const svg = new DOMParser().parseFromString(await r.text(), "image/svg+xml").documentElement;
  box.replaceChildren(document.importNode(svg, true));
}

async function solve() {
  const kind = $("kind").value;
  clearAnswer();
  let problem;
  try {
    problem = JSON.parse($("payload").value);
  } catch (e) {
    showProblem({ title: "not JSON", detail: e.message }, "payload");
    return;
  }
  updateCurl();
  document.body.dataset.state = "solving";
  $("solve").disabled = true;
  try {
    const r = await fetch(`/v1/${kind}`, { method: "POST", headers: headers(), body: JSON.stringify(problem) });
    const doc = await r.json();
    $("response").textContent = JSON.stringify(doc, null, 2);
    if (!r.ok) {
      showProblem(doc, `POST /v1/${kind}`);
      $("diagram").innerHTML = '<p class="hint">No answer to draw.</p>';
      document.body.dataset.state = "failed";
      return;
    }
    showSummary(kind, doc, r.headers.get("Cache-Status"));
    await drawDiagram(kind, problem);
    document.body.dataset.state = "solved";
  } catch (e) {
    showProblem({ title: "request failed", detail: String(e) }, "network");
    document.body.dataset.state = "failed";
  } finally {
    $("solve").disabled = false;
  }
}

async function pickScenario() {
  const option = $("scenario").selectedOptions[0];
  if (!option || !option.value) return;
  const r = await fetch(`/v1/scenarios/${encodeURIComponent(option.value)}`, { headers: headers() });
  const doc = await r.json();
  $("payload").value = JSON.stringify(doc, null, 2);
  if (option.dataset.kind) $("kind").value = option.dataset.kind;
  updateCurl();
}

async function copyCurl() {
  const text = $("curl").textContent;
  try {
    await navigator.clipboard.writeText(text);
  } catch (e) {  // not a secure context: fall back to a selection
    const area = document.createElement("textarea");
    area.value = text;
    document.body.appendChild(area);
    area.select();
    document.execCommand("copy");
    area.remove();
  }
  $("copy-curl").textContent = "Copied";
  setTimeout(() => { $("copy-curl").textContent = "Copy"; }, 1500);
}

let scenariosListed = false;  // with API keys the lists need one: they load once a key works

async function listScenarios() {
  if (scenariosListed) return;
  const [listed, known] = await Promise.all([fetch("/v1/scenarios", { headers: headers() }),
                                             fetch("/v1/kinds", { headers: headers() })]);
  if (!listed.ok || !known.ok || scenariosListed) return;
  scenariosListed = true;
  for (const kind of (await known.json()).kinds) {
    $("kind").add(new Option(kind.name, kind.name));
    if (kind.capabilities.diagram) DRAWN.add(kind.name);
  }
  for (const s of (await listed.json()).scenarios) {
    if (!s.endpoint || s.endpoint !== `/v1/${s.kind}` || s.media_type !== "application/json") continue;
    const option = new Option(`${s.kind}: ${s.title}`, s.name);
    option.dataset.kind = s.kind;
    $("scenario").add(option);
  }
  updateCurl();
}

async function start() {
  await listScenarios();
  $("scenario").addEventListener("change", pickScenario);
  $("kind").addEventListener("change", updateCurl);
  $("payload").addEventListener("input", updateCurl);
  $("apikey").addEventListener("input", () => { updateCurl(); listScenarios(); });
  $("solve").addEventListener("click", solve);
  $("copy-curl").addEventListener("click", copyCurl);
  $("tidy").addEventListener("click", () => {
    try { $("payload").value = JSON.stringify(JSON.parse($("payload").value), null, 2); } catch (e) { /* leave it */ }
  });
  updateCurl();
  document.body.dataset.state = "ready";
}

start();

// The lab page of `kneepoint serve`: one self-contained HTML document (inline
// style and script; no external script, font or picture). It polls the JSON
// API: /api/live every 2 s for the running channels (voltage, current,
// temperature, a trace of the run decimated to the card's width) and
// /api/runs every 15 s for the run list. Text from the database is only ever
// set as text (textContent), never as markup.
#include "ui/web/lab_web.h"

namespace kp::lab {

const std::string& LabWeb::Page() {
  static const std::string page = R"kphtml(<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Kneepoint lab</title>
<style>
:root { --ink:#1d2430; --dim:#637083; --line:#d9dee6; --paper:#f6f7f9; --card:#ffffff; --volt:#0f6e74; --amp:#8a5a12;
        --pass:#2d7d46; --fail:#b3362c; --none:#7a8190; --live:#0f6e74; }
* { box-sizing: border-box; }
body { margin:0; font:14px/1.4 system-ui, -apple-system, "Segoe UI", sans-serif; color:var(--ink); background:var(--paper); }
header { display:flex; align-items:baseline; gap:16px; padding:12px 20px; background:#22303f; color:#f2f4f7; }
header h1 { margin:0; font-size:18px; font-weight:600; letter-spacing:.02em; }
header .stamp { color:#aeb9c7; font-size:12px; margin-left:auto; }
main { padding:16px 20px; }
h2 { font-size:15px; margin:18px 0 8px; color:#33404f; }
#live { display:grid; grid-template-columns:repeat(auto-fill, minmax(260px, 1fr)); gap:12px; }
.card { background:var(--card); border:1px solid var(--line); border-radius:6px; padding:10px 12px; }
.card .bench { font-weight:600; }
.card .cell { color:var(--dim); font-size:12px; overflow:hidden; text-overflow:ellipsis; white-space:nowrap; }
.card .volt { font-size:30px; font-weight:600; color:var(--volt); font-variant-numeric:tabular-nums; margin-top:4px; }
.card .minor { color:var(--dim); font-size:12px; font-variant-numeric:tabular-nums; }
.card canvas { width:100%; height:54px; display:block; margin-top:6px; }
.card.stale { opacity:.55; }
.card.stale .volt::after { content:"  no news"; font-size:12px; color:var(--fail); font-weight:400; }
.empty { color:var(--dim); font-style:italic; }
.bar { display:flex; gap:8px; align-items:center; margin-bottom:8px; }
.bar input { padding:5px 8px; border:1px solid var(--line); border-radius:4px; min-width:260px; font:inherit; }
table { border-collapse:collapse; width:100%; background:var(--card); border:1px solid var(--line); }
th, td { text-align:left; padding:5px 8px; border-bottom:1px solid var(--line); white-space:nowrap; }
th { font-size:12px; color:var(--dim); font-weight:600; background:#eef1f5; }
td.num { text-align:right; font-variant-numeric:tabular-nums; }
.badge { display:inline-block; padding:1px 7px; border-radius:9px; font-size:12px; color:#fff; background:var(--none); }
.badge.pass { background:var(--pass); } .badge.fail { background:var(--fail); } .badge.running { background:var(--live); }
.err { color:var(--fail); }
</style></head>
<body>
<header><h1>Kneepoint lab</h1><span id="summary"></span><span class="stamp" id="stamp"></span></header>
<main>
<h2>Running now</h2>
<div id="live"><div class="empty">loading...</div></div>
<h2>Runs</h2>
<div class="bar"><input id="q" type="search" placeholder="search cell, serial, bench, operator, procedure, UUID"><span id="count" class="minor"></span></div>
<table><thead><tr><th>Started (UTC)</th><th>Bench</th><th>Cell</th><th>Serial</th><th>Procedure</th><th>Outcome</th>
<th>Verdict</th><th class="num">Delivered mAh</th><th class="num">% of rated</th><th>UUID</th></tr></thead>
<tbody id="runs"></tbody></table>
</main>
<script>
"use strict";
const token = new URLSearchParams(location.hash.slice(1)).get("token") || new URLSearchParams(location.search).get("token");
async function api(path) {
  const r = await fetch(path, { headers: token ? { "Authorization": "Bearer " + token } : {} });
  if (!r.ok) throw new Error(path + ": HTTP " + r.status);
  return r.json();
}
function el(tag, cls, text) {
  const e = document.createElement(tag);
  if (cls) e.className = cls;
  if (text !== undefined && text !== null) e.textContent = String(text);
  return e;
}
function fmt(v, d) { return (v === null || v === undefined) ? "" : Number(v).toFixed(d); }
function dur(s) {
  if (s === null || s === undefined) return "";
  s = Math.floor(s); const h = Math.floor(s / 3600), m = Math.floor(s % 3600 / 60), x = s % 60;
  return (h ? h + " h " : "") + String(m).padStart(2, "0") + " min " + String(x).padStart(2, "0") + " s";
}
function trace(canvas, buckets) {
  const w = canvas.clientWidth || 240, h = canvas.clientHeight || 54;
  canvas.width = w; canvas.height = h;
  const g = canvas.getContext("2d");
  g.clearRect(0, 0, w, h);
  if (!buckets.length) return;
  let lo = Infinity, hi = -Infinity;
  for (const b of buckets) { lo = Math.min(lo, b[3]); hi = Math.max(hi, b[4]); }
  if (hi - lo < 0.05) { const mid = (hi + lo) / 2; lo = mid - 0.025; hi = mid + 0.025; }
  const x = i => 1 + i * (w - 2) / Math.max(1, buckets.length - 1), y = v => h - 2 - (v - lo) * (h - 4) / (hi - lo);
  g.fillStyle = "rgba(15,110,116,0.18)"; g.strokeStyle = "#0f6e74"; g.lineWidth = 1.5;
  g.beginPath();
  buckets.forEach((b, i) => g.lineTo(x(i), y(b[4])));
  for (let i = buckets.length - 1; i >= 0; --i) g.lineTo(x(i), y(buckets[i][3]));
  g.closePath(); g.fill();
  g.beginPath();
  buckets.forEach((b, i) => (i ? g.lineTo : g.moveTo).call(g, x(i), y((b[3] + b[4]) / 2)));
  g.stroke();
}
async function refreshLive() {
  const box = document.getElementById("live");
  try {
    const data = await api("/api/live");
    box.replaceChildren();
    if (!data.running.length) box.append(el("div", "empty", "No run is going on."));
    for (const r of data.running) {
      const c = el("div", "card" + (r.heartbeat_age_s !== null && r.heartbeat_age_s > 60 ? " stale" : ""));
      c.append(el("div", "bench", r.bench || "(no bench name)"), el("div", "cell", r.cell + " \u00b7 " + r.procedure));
      c.append(el("div", "volt", r.voltage_v === null ? "\u2014" : fmt(r.voltage_v, 3) + " V"));
      c.append(el("div", "minor", fmt(r.current_a, 3) + " A \u00b7 " + fmt(r.temperature_c, 1) + " \u00b0C \u00b7 step " +
                  (r.step === null ? "" : r.step + 1) + " \u00b7 " + dur(r.t_s)));
      const cv = el("canvas"); c.append(cv); box.append(c);
      api("/api/runs/" + r.uuid + "/samples?width=120").then(s => trace(cv, s.buckets)).catch(() => {});
    }
    document.getElementById("summary").textContent = data.running.length + " running";
    document.getElementById("stamp").textContent = "updated " + new Date().toISOString().slice(11, 19) + " UTC";
  } catch (e) { box.replaceChildren(el("div", "err", String(e.message))); }
}
let query = "";
async function refreshRuns() {
  const body = document.getElementById("runs");
  try {
    const data = await api("/api/runs?limit=500" + (query ? "&text=" + encodeURIComponent(query) : ""));
    body.replaceChildren();
    for (const r of data.runs) {
      const tr = el("tr");
      const verdict = r.outcome === "running" ? el("span", "badge running", "running")
                    : el("span", "badge " + (r.verdict || "").replace(" ", "-"), r.verdict || "none");
      const cells = [el("td", "", r.started_at.replace("T", " ").replace("Z", "")), el("td", "", r.bench), el("td", "", r.cell),
                     el("td", "", r.serial), el("td", "", r.procedure), el("td", "", r.outcome), el("td"),
                     el("td", "num", fmt(r.delivered_mah, 0)), el("td", "num", fmt(r.verdict_pct_of_rated, 1)),
                     el("td", "minor", r.uuid.slice(0, 8))];
      cells[6].append(verdict);
      tr.append(...cells); body.append(tr);
    }
    document.getElementById("count").textContent = data.total + " run" + (data.total === 1 ? "" : "s") +
      (data.total > data.runs.length ? " (newest " + data.runs.length + " shown)" : "");
  } catch (e) { body.replaceChildren(); const tr = el("tr"), td = el("td", "err", String(e.message)); td.colSpan = 10; tr.append(td); body.append(tr); }
}
let typing = null;
document.getElementById("q").addEventListener("input", e => { clearTimeout(typing); typing = setTimeout(() => { query = e.target.value.trim(); refreshRuns(); }, 250); });
refreshLive(); refreshRuns();
setInterval(refreshLive, 2000); setInterval(refreshRuns, 15000);
</script>
</body></html>
)kphtml";
  return page;
}

}  // namespace kp::lab

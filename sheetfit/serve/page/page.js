// The page of `sheetfit serve`: token, workbook, its models, refresh with phases, download.
// Plain script, no libraries; every text from a workbook goes into the page as text.
"use strict";

const TOKEN_KEY = "sheetfit-token";
const XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet";
const PHASES = ["read", "fit", "write", "graft"];
const FINISHED = ["refreshed", "refused", "fault", "timeout", "stopped"];
const POLL_MS = 250;

const $ = (id) => document.getElementById(id);
let book = null;        // the chosen File
let downloadUrl = null; // the object URL of the last refreshed book

function token() {
  return sessionStorage.getItem(TOKEN_KEY) || "";
}

function say(text) {
  $("status").textContent = text;
}

function el(tag, text, cls) {
  const node = document.createElement(tag);
  if (text !== undefined && text !== null) node.textContent = text;
  if (cls) node.className = cls;
  return node;
}

async function call(path, options) {
  const opts = Object.assign({}, options || {});
  opts.headers = Object.assign({}, opts.headers || {}, {Authorization: "Bearer " + token()});
  const reply = await fetch(path, opts);
  if (reply.status === 401) {
    const err = new Error("The token was not accepted. Paste the token that `sheetfit serve` " +
                          "printed when it started, then choose Use this token.");
    err.kind = "token";
    throw err;
  }
  return reply;
}

async function problem(reply) {
  // Every reply that is not a workbook is JSON with a status word and a message.
  try {
    return await reply.json();
  } catch (e) {
    return {status: "fault", message: "The service answered " + reply.status + "."};
  }
}

function clearRefusal() {
  $("refusal").hidden = true;
}

function showRefusal(r) {
  $("refusal-message").textContent = r.message;
  const where = [];
  if (r.file) where.push("file " + r.file);
  if (r.name) where.push("defined name " + r.name);
  if (r.sheet !== null && r.sheet !== undefined) where.push("sheet '" + r.sheet + "'");
  if (r.cell) where.push("cell " + r.cell);
  $("refusal-where").textContent = where.length ? where.join(", ") : "the workbook as a whole";
  $("refusal-hint").textContent = r.hint || "Correct the workbook and choose it again.";
  $("refusal-line").textContent = r.line || r.message;
  $("refusal").hidden = false;
}

function valueText(v) {
  if (v === true) return "yes";
  if (v === false) return "no";
  if (v === null || v === undefined) return "not set";
  return String(v);
}

function modelCard(m) {
  const card = el("article", null, "model");
  card.setAttribute("aria-labelledby", "model-" + m.model);
  const head = el("h3", m.model + " — " + m.title);
  head.id = "model-" + m.model;
  card.append(head);
  card.append(el("p", m.response + " from " + m.attributes.join(", "), "what"));
  const counts = "rows used " + m.rows_used + ", left out " + m.rows_left_out +
    (m.new_rows ? ", rows to predict " + m.new_rows : "");
  card.append(el("p", counts, "counts"));

  const figs = el("ul", null, "figures");
  figs.setAttribute("aria-label", "Key figures of " + m.model);
  for (const f of m.figures) figs.append(el("li", f));
  card.append(figs);

  const table = el("table", null, "settings");
  table.append(el("caption", "Settings"));
  const headRow = el("tr");
  for (const h of ["setting", "value", "from", "what it does"]) {
    const th = el("th", h);
    th.scope = "col";
    headRow.append(th);
  }
  const thead = el("thead");
  thead.append(headRow);
  table.append(thead);
  const body = el("tbody");
  for (const s of m.settings || []) {
    const tr = el("tr");
    const th = el("th", s.name);
    th.scope = "row";
    tr.append(th, el("td", valueText(s.value)), el("td", s.given ? "the workbook" : "default"),
              el("td", s.meaning, "meaning"));
    body.append(tr);
  }
  table.append(body);
  card.append(table);

  if (m.cautions.length) {
    const box = el("div", null, "cautions");
    box.append(el("h4", "Read with care"));
    const list = el("ul");
    for (const c of m.cautions) list.append(el("li", c));
    box.append(list);
    card.append(box);
  }
  return card;
}

const lastSettings = {}; // model -> settings, as the inspection showed them

function showModels(models) {
  for (const m of models) if (m.settings) lastSettings[m.model] = m.settings;
  const holder = $("models");
  holder.replaceChildren(...models.map(modelCard));
  $("models-empty").hidden = models.length > 0;
}

function markPhase(li, state) {
  // The dots show the state; the words in .sr-only say it to a screen reader.
  li.className = state;
  let said = li.querySelector(".sr-only");
  if (!said) {
    said = el("span", "", "sr-only");
    li.append(said);
  }
  said.textContent = state === "done" ? " (done)" : state === "current" ? " (under way)" : "";
  if (state === "current") li.setAttribute("aria-current", "step");
  else li.removeAttribute("aria-current");
}

function resetPhases() {
  for (const li of document.querySelectorAll("#phases li")) markPhase(li, "");
}

function showPhase(phase, finished) {
  const at = PHASES.indexOf(phase);
  for (const li of document.querySelectorAll("#phases li")) {
    const i = PHASES.indexOf(li.dataset.phase);
    markPhase(li, i < at || (finished && i === at) ? "done" : i === at ? "current" : "");
  }
}

function hideDownload() {
  const link = $("download");
  link.hidden = true;
  if (downloadUrl) URL.revokeObjectURL(downloadUrl);
  downloadUrl = null;
}

async function inspect(file) {
  book = file;
  clearRefusal();
  hideDownload();
  resetPhases();
  showModels([]);
  $("models-empty").textContent = "Choose a workbook to see its models here.";
  $("refresh").disabled = true;
  $("book-name").textContent = file.name + " (" + Math.ceil(file.size / 1024) + " KB)";
  say("Reading " + file.name + " and fitting its models…");
  try {
    const reply = await call("/books/inspect?name=" + encodeURIComponent(file.name),
                             {method: "POST", headers: {"Content-Type": XLSX}, body: file});
    const data = await problem(reply);
    if (reply.ok) {
      showModels(data.models);
      $("refresh").disabled = false;
      say(file.name + ": " + data.models.length + " model" +
          (data.models.length === 1 ? "" : "s") + " declared. Ready to refresh.");
    } else if (data.status === "refused") {
      showRefusal(data);
      $("models-empty").textContent = "No models to show until the workbook is corrected.";
      say(file.name + " cannot be used as it is; the reason follows.");
    } else {
      say(data.message);
    }
  } catch (err) {
    say(err.message);
  }
}

async function refreshBook() {
  if (!book) return;
  clearRefusal();
  hideDownload();
  resetPhases();
  $("refresh").disabled = true;
  say("Sending " + book.name + "…");
  try {
    const reply = await call("/jobs?name=" + encodeURIComponent(book.name),
                             {method: "POST", headers: {"Content-Type": XLSX}, body: book});
    let job = await problem(reply);
    if (!reply.ok) {
      say(job.message);
      return;
    }
    while (!FINISHED.includes(job.state)) {
      if (job.phase) {
        showPhase(job.phase, false);
        const li = document.querySelector('#phases li[data-phase="' + job.phase + '"]');
        say("Refreshing: " + li.firstChild.textContent.toLowerCase() + "…");
      } else {
        say("Waiting for a worker…");
      }
      await new Promise((resolve) => setTimeout(resolve, POLL_MS));
      const poll = await call("/jobs/" + encodeURIComponent(job.job));
      const next = await problem(poll);
      if (!poll.ok) {
        say(next.message);
        return;
      }
      job = next;
    }
    await finish(job);
  } catch (err) {
    say(err.message);
  } finally {
    $("refresh").disabled = !book;
  }
}

async function finish(job) {
  if (job.state === "refused") {
    resetPhases();
    showRefusal(job.refusal);
    say("The workbook was not refreshed; the reason is given after the workbook step.");
    return;
  }
  if (job.state !== "refreshed") {
    say(job.message || "The refresh did not finish.");
    return;
  }
  showPhase("graft", true);
  const reply = await call("/jobs/" + encodeURIComponent(job.job) + "/book");
  if (!reply.ok) {
    say((await problem(reply)).message);
    return;
  }
  const blob = await reply.blob();
  const dot = job.file.lastIndexOf(".");
  const name = (dot > 0 ? job.file.slice(0, dot) : job.file) + "-refreshed" +
    (dot > 0 ? job.file.slice(dot) : ".xlsx");
  downloadUrl = URL.createObjectURL(new Blob([blob], {type: XLSX}));
  const link = $("download");
  link.href = downloadUrl;
  link.download = name;
  link.textContent = "Download " + name;
  link.hidden = false;
  if (job.outcome) showModels(mergeSettings(job.outcome.models));
  say("Refreshed at " + (job.outcome ? job.outcome.refreshed : "") +
      ". The refreshed workbook is ready to download.");
  link.focus();
}

function mergeSettings(models) {
  // A refresh reports figures without settings; keep the settings the inspection showed.
  return models.map((m) => Object.assign({settings: lastSettings[m.model] || []}, m));
}

function setUp() {
  const saved = token();
  if (saved) $("token").value = saved;
  $("token-form").addEventListener("submit", (ev) => {
    ev.preventDefault();
    const value = $("token").value.trim();
    if (!value) return;
    sessionStorage.setItem(TOKEN_KEY, value);
    say("Token kept for this tab. Now choose a workbook.");
    $("book").focus();
  });
  $("book").addEventListener("change", () => {
    if ($("book").files.length) inspect($("book").files[0]);
  });
  const drop = $("drop");
  for (const kind of ["dragenter", "dragover"]) {
    drop.addEventListener(kind, (ev) => {
      ev.preventDefault();
      drop.classList.add("over");
    });
  }
  for (const kind of ["dragleave", "drop"]) {
    drop.addEventListener(kind, () => drop.classList.remove("over"));
  }
  drop.addEventListener("drop", (ev) => {
    ev.preventDefault();
    const files = ev.dataTransfer.files;
    if (files.length) inspect(files[0]);
  });
  $("refresh").addEventListener("click", refreshBook);
}

document.addEventListener("DOMContentLoaded", setUp);

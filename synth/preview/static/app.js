// synth preview: the page's behaviour.  Plain JavaScript, no framework, no network beyond this server.
//
// The controls come from GET /api/patch; every change is solved on the server (POST /api/solve,
// debounced) and the table that comes back is both shown and played here with the Web Audio API:
// one sine oscillator per partial (the strongest ones), each with its own amplitude, phase and
// exponential decay (60 dB in its T60).
"use strict";

(() => {
  const SOLVE_DELAY_MS = 150;       // debounce of re-solving while a value is typed
  const FIGURE_DELAY_MS = 400;      // the full figure (about a second on the server) once values settle
  const START_VOLUME_DB = -18;      // the master volume starts low (listening caution)
  const MAX_NOTE_S = 20;            // a note stops after this long, however slow its decay
  const FLOOR = 1e-4;               // partials below -80 dB re the strongest are not played
  const KEY_ROW = ["KeyA", "KeyS", "KeyD", "KeyF", "KeyG", "KeyH", "KeyJ", "KeyK", "KeyL", "Semicolon", "Quote"];
  const KEY_ROW_ZERO = 4;           // KeyG plays the patch as it is
  const LN_1000 = Math.log(1000);   // 60 dB as a natural-log amplitude ratio

  const state = {
    controls: [], saved: {}, table: null, units: "workshop",
    asked: 0, shown: 0, timer: null, figureTimer: null,
    ctx: null, master: null, waves: null, wavesFor: null,
    notes: new Map(), octave: 0, volumeDb: START_VOLUME_DB, wavUrl: null,
  };
  const $ = (id) => document.getElementById(id);

  function dbToGain(db) { return Math.pow(10, db / 20); }
  function g3(x) { return Number(x.toPrecision(3)).toString(); }
  function signed(x, digits) { return (x >= 0 ? "+" : "") + x.toFixed(digits); }

  async function api(path, body) {
    const init = body === undefined ? {} : {
      method: "POST", headers: {"Content-Type": "application/json"}, body: JSON.stringify(body),
    };
    let response;
    try {
      response = await fetch(path, init);
    } catch (error) {
      return {ok: false, error: "the preview server does not answer (was it stopped?)", key: null, status: 0};
    }
    let data;
    try {
      data = await response.json();
    } catch (error) {
      data = {ok: false, error: `the server answered ${response.status}`, key: null};
    }
    data.status = response.status;
    return data;
  }

  // ---- controls ----

  function values() {
    const result = {};
    for (const input of $("controls").querySelectorAll("input[name]")) result[input.name] = input.value;
    return result;
  }

  function buildControls(controls) {
    const form = $("controls");
    form.textContent = "";
    const sections = new Map();
    for (const control of controls) {
      if (!sections.has(control.section)) {
        const fieldset = document.createElement("fieldset");
        const legend = document.createElement("legend");
        legend.textContent = control.section;
        fieldset.append(legend);
        form.append(fieldset);
        sections.set(control.section, fieldset);
      }
      const id = "control-" + control.key.replace(/[^A-Za-z0-9_]/g, "-");
      const box = document.createElement("div");
      box.className = "control";
      const label = document.createElement("label");
      label.htmlFor = id;
      label.textContent = control.label;
      const key = document.createElement("span");
      key.className = "key";
      key.textContent = control.key;
      label.append(key);
      const input = document.createElement("input");
      input.type = "text";
      input.id = id;
      input.name = control.key;
      input.value = control.value;
      input.placeholder = control.placeholder;
      input.title = control.hint;
      input.spellcheck = false;
      const error = document.createElement("span");
      error.className = "control-error";
      error.dataset.for = control.key;
      error.setAttribute("aria-live", "polite");
      input.addEventListener("input", changed);
      input.addEventListener("change", changed);
      box.append(label, input, error);
      sections.get(control.section).append(box);
    }
  }

  function markChanged() {
    for (const input of $("controls").querySelectorAll("input[name]")) {
      input.classList.toggle("changed", input.value !== state.saved[input.name]);
    }
  }

  function changed() {
    markChanged();
    clearTimeout(state.timer);
    state.timer = setTimeout(solve, SOLVE_DELAY_MS);
  }

  function clearErrors() {
    for (const span of $("controls").querySelectorAll(".control-error")) span.textContent = "";
    for (const input of $("controls").querySelectorAll("input.invalid")) input.classList.remove("invalid");
    $("solve-error").textContent = "";
  }

  // Show a one-line error beside its control, or above the table if it is about no control.
  function showError(data, fallback) {
    const input = data.key ? $("controls").querySelector(`input[name="${CSS.escape(data.key)}"]`) : null;
    if (input) {
      input.classList.add("invalid");
      input.parentElement.querySelector(".control-error").textContent = data.error;
    } else {
      fallback.textContent = data.error;
    }
  }

  // ---- the table ----

  async function solve() {
    const asked = ++state.asked;
    const solved = values();
    const data = await api("/api/solve", {values: solved, units: state.units});
    if (asked < state.shown) return;  // an older answer arriving late
    state.shown = asked;
    clearErrors();
    if (!data.ok) {
      showError(data, $("solve-error"));
      $("partial-table").classList.add("stale");
      return;
    }
    $("partial-table").classList.remove("stale");
    state.table = data;
    showTable(data);
    clearTimeout(state.figureTimer);
    state.figureTimer = setTimeout(() => fullFigure(asked, solved), FIGURE_DELAY_MS);
  }

  // The shared partials figure replaces the quick one, unless the values moved on meanwhile.
  async function fullFigure(asked, solved) {
    if (asked !== state.asked) return;
    const data = await api("/api/figure", {values: solved});
    if (asked !== state.asked || !data.ok || !data.figure_svg) return;
    $("figure-img").src = "data:image/svg+xml;charset=utf-8," + encodeURIComponent(data.figure_svg);
  }

  function showTable(data) {
    const count = data.n_modes === 1 ? "1 mode" : `${data.n_modes} modes`;
    $("summary").textContent = `${data.name} (${data.resonator}), fundamental ${data.fundamental_hz.toFixed(3)} Hz, ${count}`;
    const parameters = $("parameters");
    parameters.textContent = "";
    for (const [label, text] of data.parameters) {
      const dt = document.createElement("dt");
      dt.textContent = label;
      const dd = document.createElement("dd");
      dd.textContent = text;
      parameters.append(dt, dd);
    }
    const warnings = $("warnings");
    warnings.textContent = "";
    for (const text of data.warnings) {
      const li = document.createElement("li");
      li.textContent = "warning: " + text;
      warnings.append(li);
    }
    const img = $("figure-img");
    if (data.figure_svg) {
      img.src = "data:image/svg+xml;charset=utf-8," + encodeURIComponent(data.figure_svg);
      img.hidden = false;
    } else {
      img.hidden = true;
    }
    const body = document.createElement("tbody");
    body.id = "partials";
    for (const row of data.rows) {
      const tr = document.createElement("tr");
      tr.dataset.frequencyHz = String(row.frequency_hz);
      const cells = [
        String(row.index), row.label, row.frequency_hz.toFixed(2),
        row.ratio === null ? "" : row.ratio.toFixed(4),
        row.cents === null ? "" : signed(row.cents, 1),
        row.t60_s === null ? "" : g3(row.t60_s),
        row.level_db === null ? "null" : row.level_db.toFixed(1),
      ];
      for (const text of cells) {
        const td = document.createElement("td");
        td.textContent = text;
        tr.append(td);
      }
      body.append(tr);
    }
    $("partials").replaceWith(body);
    const more = data.n_modes - data.rows.length;
    $("more-modes").textContent = more > 0
      ? `... ${more} more modes (synth modes lists them all); the page plays the strongest ${data.voices.length}`
      : "";
  }

  // ---- sound: the partial table played with the Web Audio API ----

  function audio() {
    if (!state.ctx) {
      const Context = window.AudioContext || window.webkitAudioContext;
      if (!Context) {
        $("listen-status").textContent = "this browser has no Web Audio: use 'Render on the server'";
        return null;
      }
      const ctx = new Context();
      const master = ctx.createGain();
      master.gain.value = dbToGain(state.volumeDb);
      // a limiter after the master volume: many notes at once cannot sum to a full-scale blast
      const limiter = ctx.createDynamicsCompressor();
      limiter.threshold.value = -6;
      limiter.knee.value = 0;
      limiter.ratio.value = 20;
      limiter.attack.value = 0.002;
      limiter.release.value = 0.1;
      master.connect(limiter);
      limiter.connect(ctx.destination);
      state.ctx = ctx;
      state.master = master;
    }
    if (state.ctx.state === "suspended") state.ctx.resume().catch(() => {});
    return state.ctx;
  }

  // One single-harmonic wave per partial, started at its phase: sin(wt + p) = sin p cos wt + cos p sin wt.
  function waves(table, ctx) {
    if (state.wavesFor !== table) {
      state.waves = table.voices.map(([, amplitude, , phase]) => {
        const p = phase + (amplitude < 0 ? Math.PI : 0);
        return ctx.createPeriodicWave(new Float32Array([0, Math.sin(p)]), new Float32Array([0, Math.cos(p)]),
          {disableNormalization: true});
      });
      state.wavesFor = table;
    }
    return state.waves;
  }

  function fundamentalMidi() {
    return state.table ? Math.round(69 + 12 * Math.log2(state.table.fundamental_hz / 440)) : 60;
  }

  function play(id, semitones, velocity) {
    const table = state.table;
    if (!table || table.voices.length === 0) return;
    const ctx = audio();
    if (!ctx) return;
    release(id, 0.02);
    const ratio = Math.pow(2, semitones / 12);
    const nyquist = ctx.sampleRate / 2;
    const shapes = waves(table, ctx);
    let strongest = 0;
    for (const [, a] of table.voices) strongest = Math.max(strongest, Math.abs(a));
    const heard = table.voices.map((v, i) => [v, i]).filter(([[f, a]]) => f * ratio < nyquist && Math.abs(a) >= strongest * FLOOR);
    const sum = heard.reduce((total, [[, a]]) => total + Math.abs(a), 0);
    if (sum === 0) {
      $("listen-status").textContent = "every partial of this note is above the audio device's Nyquist frequency";
      return;
    }
    const t0 = ctx.currentTime + 0.01;
    const note = ctx.createGain();
    note.gain.value = Math.min(velocity / 100, 1.27) / sum;  // one note's peak stays below full scale
    note.connect(state.master);
    const oscillators = [];
    let end = t0;
    for (const [[f, a, t60], i] of heard) {
      const amplitude = Math.abs(a);
      const seconds = Math.min(1.5 * t60, MAX_NOTE_S);   // to -90 dB, or the cap
      const osc = ctx.createOscillator();
      osc.setPeriodicWave(shapes[i]);
      osc.frequency.value = f * ratio;
      const gain = ctx.createGain();
      gain.gain.setValueAtTime(amplitude, t0);
      gain.gain.exponentialRampToValueAtTime(amplitude * Math.pow(10, -3 * seconds / t60), t0 + seconds);
      gain.gain.setTargetAtTime(0, t0 + seconds, 0.01);
      osc.connect(gain);
      gain.connect(note);
      osc.start(t0);
      osc.stop(t0 + seconds + 0.1);
      oscillators.push(osc);
      end = Math.max(end, t0 + seconds + 0.1);
    }
    const entry = {note, oscillators, end};
    state.notes.set(id, entry);
    setTimeout(() => forget(id, entry), (end - ctx.currentTime) * 1000 + 200);
    showNotes();
  }

  function forget(id, entry) {
    if (state.notes.get(id) === entry) state.notes.delete(id);
    entry.note.disconnect();
    showNotes();
  }

  // Key-up: the dampers (the patch's release T60), or a quick fade when retriggering.
  function release(id, fadeSeconds) {
    const entry = state.notes.get(id);
    if (!entry || !state.ctx) return;
    const table = state.table;
    const t60 = fadeSeconds !== undefined ? fadeSeconds : (table ? table.release_t60_s : null);
    if (t60 === null || t60 === undefined) return;  // no dampers: it rings on
    const now = state.ctx.currentTime;
    entry.note.gain.cancelScheduledValues(now);
    entry.note.gain.setValueAtTime(entry.note.gain.value, now);
    entry.note.gain.setTargetAtTime(0, now, t60 / LN_1000);
    const stop = now + Math.min(1.5 * t60, MAX_NOTE_S) + 0.05;
    if (stop < entry.end) {
      for (const osc of entry.oscillators) osc.stop(stop);
      entry.end = stop;
    }
    state.notes.delete(id);
    setTimeout(() => forget(id, entry), (stop - now) * 1000 + 200);
    showNotes();
  }

  function showNotes() {
    const n = state.notes.size;
    $("listen-status").textContent = n ? `${n} note${n === 1 ? "" : "s"} sounding` : "";
  }

  function keyDown(event) {
    const target = event.target;
    if (event.ctrlKey || event.metaKey || event.altKey) return;
    if (target && (target.tagName === "INPUT" || target.tagName === "TEXTAREA" || target.tagName === "SELECT")) return;
    if (event.code === "KeyZ" || event.code === "KeyX") {
      if (!event.repeat) state.octave = Math.max(-4, Math.min(4, state.octave + (event.code === "KeyZ" ? -1 : 1)));
      $("octave-text").textContent = `octave ${state.octave > 0 ? "+" : ""}${state.octave}`;
      event.preventDefault();
      return;
    }
    const index = KEY_ROW.indexOf(event.code);
    if (index < 0) return;
    event.preventDefault();
    if (event.repeat) return;
    play(event.code, index - KEY_ROW_ZERO + 12 * state.octave, 100);
  }

  function keyUp(event) {
    if (KEY_ROW.includes(event.code)) release(event.code);
  }

  // ---- MIDI keyboard (Web MIDI, where the browser offers it) ----

  function midiMessage(event) {
    const [status, note, velocity] = event.data;
    const kind = status & 0xf0;
    if (kind === 0x90 && velocity > 0) play(`midi-${note}`, note - fundamentalMidi(), velocity);
    else if (kind === 0x80 || (kind === 0x90 && velocity === 0)) release(`midi-${note}`);
  }

  function connectMidi() {
    const status = $("midi-status");
    if (!navigator.requestMIDIAccess) {
      status.textContent = "this browser does not offer Web MIDI";
      return;
    }
    navigator.requestMIDIAccess().then((access) => {
      const bind = () => {
        let n = 0;
        for (const input of access.inputs.values()) {
          input.onmidimessage = midiMessage;
          n += 1;
        }
        status.textContent = n ? `MIDI: ${n} input${n === 1 ? "" : "s"}; the key nearest the patch's pitch plays it as it is`
          : "MIDI: no input connected";
      };
      bind();
      access.onstatechange = bind;
    }, () => {
      status.textContent = "MIDI was not allowed";
    });
  }

  // ---- the server's render, and saving ----

  async function renderOnServer() {
    const status = $("listen-status");
    status.textContent = "rendering on the server...";
    let response;
    try {
      response = await fetch("/api/render.wav?" + new URLSearchParams(values()));
    } catch (error) {
      status.textContent = "the preview server does not answer";
      return;
    }
    if (!response.ok) {
      let data = {error: `the server answered ${response.status}`, key: null};
      try { data = await response.json(); } catch (error) { /* keep the status line */ }
      status.textContent = "";
      showError(data, status);
      return;
    }
    const blob = await response.blob();
    if (state.wavUrl) URL.revokeObjectURL(state.wavUrl);
    state.wavUrl = URL.createObjectURL(blob);
    const player = $("server-audio");
    player.src = state.wavUrl;
    player.volume = Math.min(1, dbToGain(state.volumeDb));
    const link = $("download");
    link.href = state.wavUrl;
    link.download = `${state.table ? state.table.name : "patch"}-preview.wav`;
    link.hidden = false;
    status.textContent = "";
    player.play().catch(() => {});
  }

  async function save(asName) {
    const status = $("save-status");
    const name = asName ? $("save-as-name").value.trim() : null;
    if (asName && !name) {
      status.className = "error";
      status.textContent = "give a file name for save as, e.g. new-name.yaml";
      return;
    }
    let data = await api("/api/save", {values: values(), name, replace: false});
    if (data.exists && window.confirm(`${data.error.replace(/^save: /, "")}?`)) {
      data = await api("/api/save", {values: values(), name, replace: true});
    }
    clearErrors();
    if (!data.ok) {
      status.className = "error";
      status.textContent = "";
      showError(data, status);
      return;
    }
    state.saved = values();
    markChanged();
    status.className = "";
    status.textContent = data.written
      ? `saved ${data.file}` + (data.changed.length ? ` (${data.changed.join(", ")})` : "")
      : `${data.file} already holds these values`;
    $("file-line").textContent = `editing ${data.file}`;
  }

  // ---- start ----

  async function start() {
    const data = await api("/api/patch");
    if (!data.ok) {
      $("file-line").textContent = data.error;
      $("file-line").className = "error";
      return;
    }
    document.title = `${data.name}: synth preview`;
    $("title").textContent = `${data.name} (${data.resonator})`;
    $("file-line").textContent = `editing ${data.file}`;
    $("caution").textContent = data.caution.charAt(0).toUpperCase() + data.caution.slice(1) + ".";
    state.units = data.default_units;
    $("units").value = state.units;
    buildControls(data.controls);
    state.saved = values();
    await solve();
  }

  document.addEventListener("DOMContentLoaded", () => {
    $("volume").value = String(START_VOLUME_DB);
    $("server-audio").volume = dbToGain(START_VOLUME_DB);
    $("volume").addEventListener("input", () => {
      state.volumeDb = Number($("volume").value);
      $("volume-text").textContent = `${state.volumeDb} dB`;
      if (state.master) state.master.gain.setTargetAtTime(dbToGain(state.volumeDb), state.ctx.currentTime, 0.02);
      $("server-audio").volume = Math.min(1, dbToGain(state.volumeDb));
    });
    $("play").addEventListener("click", () => {
      play("button", 12 * state.octave, 100);
    });
    $("units").addEventListener("change", () => {
      state.units = $("units").value;
      solve();
    });
    $("midi").addEventListener("click", connectMidi);
    $("render").addEventListener("click", renderOnServer);
    $("save").addEventListener("click", () => save(false));
    $("save-as").addEventListener("click", () => save(true));
    $("controls").addEventListener("submit", (event) => event.preventDefault());
    document.addEventListener("keydown", keyDown);
    document.addEventListener("keyup", keyUp);
    window.addEventListener("blur", () => { for (const id of [...state.notes.keys()]) release(id); });
    start();
  });
})();

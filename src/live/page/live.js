/* cellvigil live page: one WebSocket to /live, four charts, readouts, alarms and control. */
'use strict';

(() => {
  const PROTOCOL_VERSION = 1;
  /** Points kept per chart; past this the page thins its copy the way the daemon does. */
  const MAX_POINTS = 4000;
  const RENDER_EVERY_MS = 400;
  const BACKOFF_MIN_MS = 500;
  const BACKOFF_MAX_MS = 15000;
  const TOKEN_KEY = 'cellvigil-control-token';

  const $ = (id) => document.getElementById(id);
  const params = new URLSearchParams(location.search);
  const viewerToken = params.get('token');

  // ---- state -------------------------------------------------------------------------
  const series = { t: [], v: [], a: [], c: [], q: [] };
  let stride = 1;
  let seen = 0;
  let run = null;
  let latest = null;
  let stateName = '';
  let cutoffV = null;
  let ttc = null;
  let result = null;
  let controlToken = readStoredToken();
  let alertsOn = false;
  let audio = null;
  let dirty = false;
  let nextId = 1;
  const pending = new Map();
  const baseTitle = document.title;

  function readStoredToken() {
    try {
      return sessionStorage.getItem(TOKEN_KEY);
    } catch {
      return null;
    }
  }

  function clearSeries() {
    for (const k of Object.keys(series)) series[k] = [];
    stride = 1;
    seen = 0;
  }

  function pushPoint(t, v, a, c, ah) {
    const last = series.t[series.t.length - 1];
    if (last !== undefined && t <= last) return;
    if (seen++ % stride !== 0) return;
    if (series.t.length >= MAX_POINTS) {
      for (const k of Object.keys(series)) series[k] = series[k].filter((_, i) => i % 2 === 0);
      stride *= 2;
    }
    series.t.push(t);
    series.v.push(v);
    series.a.push(a);
    series.c.push(c);
    series.q.push(ah * 1000);
  }

  // ---- formatting --------------------------------------------------------------------
  function fixed(x, digits) {
    return typeof x === 'number' && Number.isFinite(x) ? x.toFixed(digits) : '–';
  }

  function clock(s) {
    if (typeof s !== 'number' || !Number.isFinite(s)) return '–';
    const t = Math.max(0, Math.round(s));
    const h = Math.floor(t / 3600);
    const m = Math.floor((t % 3600) / 60);
    const sec = t % 60;
    return `${h}:${String(m).padStart(2, '0')}:${String(sec).padStart(2, '0')}`;
  }

  function roughly(s) {
    if (typeof s !== 'number' || !Number.isFinite(s)) return '–';
    if (s < 60) return `≈ ${Math.round(s)} s`;
    if (s < 3600) return `≈ ${Math.round(s / 60)} min`;
    const h = Math.floor(s / 3600);
    return `≈ ${h} h ${Math.round((s - h * 3600) / 60)} min`;
  }

  function axisTime(_u, splits) {
    return globalThis.cvTimeAxis.labels(splits);
  }

  // ---- charts ------------------------------------------------------------------------
  const AXIS = {
    stroke: '#9aa3ae',
    grid: { stroke: '#262d36', width: 1 },
    ticks: { stroke: '#262d36', width: 1 },
  };

  function chartSize(el) {
    const narrow = window.matchMedia('(max-width: 640px)').matches;
    return { width: Math.max(200, el.clientWidth - 12), height: narrow ? 170 : 210 };
  }

  function limitLine(getLimit, color) {
    return (u) => {
      const limit = getLimit();
      if (limit == null) return;
      const y = u.valToPos(limit, 'y', true);
      if (y < u.bbox.top || y > u.bbox.top + u.bbox.height) return;
      const ctx = u.ctx;
      ctx.save();
      ctx.setLineDash([7, 5]);
      ctx.strokeStyle = color;
      ctx.lineWidth = Math.max(1, window.devicePixelRatio || 1);
      ctx.beginPath();
      ctx.moveTo(u.bbox.left, y);
      ctx.lineTo(u.bbox.left + u.bbox.width, y);
      ctx.stroke();
      ctx.restore();
    };
  }

  /** A y range that also holds the limit line, so the margin to it is always in view. */
  function rangeWith(getLimit) {
    return (_u, min, max) => {
      const limit = getLimit();
      let lo = min;
      let hi = max;
      if (limit != null) {
        lo = lo == null ? limit : Math.min(lo, limit);
        hi = hi == null ? limit : Math.max(hi, limit);
      }
      if (lo == null || hi == null) return [0, 1];
      const pad = Math.max((hi - lo) * 0.08, Math.abs(hi) * 0.002, 0.01);
      return [lo - pad, hi + pad];
    };
  }

  function makeChart(id, label, color, digits, key, getLimit) {
    const el = $(id);
    const opts = {
      ...chartSize(el),
      scales: { x: { time: false }, y: getLimit ? { range: rangeWith(getLimit) } : {} },
      series: [
        { label: 'elapsed', value: (_u, v) => clock(v) },
        {
          label,
          stroke: color,
          width: 1.6,
          points: { show: false },
          value: (_u, v) => fixed(v, digits),
        },
      ],
      axes: [
        { ...AXIS, values: axisTime, incrs: globalThis.cvTimeAxis.STEPS, space: 56 },
        { ...AXIS, size: 56 },
      ],
      cursor: { sync: { key: 'cellvigil' }, drag: { x: true, y: false } },
      hooks: getLimit ? { draw: [limitLine(getLimit, '#ff5a4e')] } : {},
    };
    const chart = new uPlot(opts, [[], []], el);
    chart.cvKey = key;
    new ResizeObserver(() => chart.setSize(chartSize(el))).observe(el);
    return chart;
  }

  const charts = [
    makeChart('chart-voltage', 'voltage', '#6cb6ff', 3, 'v', () => cutoffV),
    makeChart('chart-current', 'current', '#f5c26b', 3, 'a', null),
    makeChart('chart-temp', 'temperature', '#ff7f6e', 1, 'c', () =>
      run ? run.max_temperature_C : null,
    ),
    makeChart('chart-charge', 'charge', '#8fd3c7', 0, 'q', null),
  ];

  // ---- rendering ---------------------------------------------------------------------
  function setText(id, text) {
    const el = $(id);
    if (el.textContent !== text) el.textContent = text;
  }

  function render() {
    dirty = false;
    for (const c of charts) c.setData([series.t, series[c.cvKey]]);
    const s = latest;
    setText('r-voltage', fixed(s && s.voltage_V, 3));
    setText('r-current', fixed(s && s.current_A, 3));
    setText('r-charge', s ? fixed(s.charge_Ah * 1000, 0) : '–');
    setText('r-energy', fixed(s && s.energy_Wh, 2));
    setText('r-temp', s && s.temperature_C != null ? fixed(s.temperature_C, 1) : '–');
    setText('r-cutoff', fixed(cutoffV, 3));
    setText('r-ttc', result ? '–' : roughly(ttc));
    setText('r-elapsed', clock(s && s.host_s));
    const hot = run && s && s.temperature_C != null && s.temperature_C >= run.max_temperature_C - 5;
    $('r-temp').closest('.tile').classList.toggle('hot', Boolean(hot));
    showState(stateName);
  }

  function resultReason() {
    return result && typeof result.end_reason === 'string' ? result.end_reason : null;
  }

  function schedule() {
    dirty = true;
  }
  setInterval(() => {
    if (dirty) requestAnimationFrame(render);
  }, RENDER_EVERY_MS);

  function showState(name) {
    const el = $('state');
    el.dataset.state = name;
    setText('state', name || '–');
  }

  function showRun() {
    setText(
      'run-title',
      run ? `${run.label} · ${run.cells} × ${run.chemistry} · ${run.source}` : 'no run yet',
    );
    const facts = $('facts');
    facts.replaceChildren();
    if (!run) return;
    const rows = [
      ['Label', run.label],
      ['Chemistry', `${run.cells} × ${run.chemistry}`],
      ['Cutoff floor', `${run.floor_V.toFixed(3)} V`],
      ['Temperature limit', `${run.max_temperature_C} °C`],
      ['Calibration', run.calibration_id],
      ['Source', run.source],
      ['Started', new Date(run.started_wall).toLocaleString()],
      ['Run folder', run.run_folder],
    ];
    for (const [k, v] of rows) {
      const dt = document.createElement('dt');
      dt.textContent = k;
      const dd = document.createElement('dd');
      dd.textContent = v;
      facts.append(dt, dd);
    }
    const input = $('cutoff-input');
    input.min = String(run.floor_V);
    setText(
      'floor-hint',
      `Never below the floor of ${run.floor_V.toFixed(3)} V for ${run.cells} ${run.chemistry} cell(s).`,
    );
  }

  function logItem(listId, at, parts, newestFirst = true, level = null) {
    const list = $(listId);
    const empty = list.querySelector('.empty');
    if (empty) empty.remove();
    const li = document.createElement('li');
    if (level) li.dataset.level = level;
    const when = document.createElement('span');
    when.className = 'at';
    when.textContent = clock(at);
    li.append(when);
    for (const [cls, text] of parts) {
      const span = document.createElement('span');
      if (cls) span.className = cls;
      span.textContent = text;
      li.append(span);
    }
    if (newestFirst) list.prepend(li);
    else list.append(li);
    while (list.children.length > 100) list.lastElementChild.remove();
  }

  function resetLog(listId, emptyText) {
    const li = document.createElement('li');
    li.className = 'empty';
    li.textContent = emptyText;
    $(listId).replaceChildren(li);
  }

  function addEvent(e) {
    if (e.kind === 'cutoff')
      logItem('events', e.host_s ?? latest?.host_s ?? 0, [
        ['kind', 'cutoff: '],
        ['', `${e.cutoff_V.toFixed(3)} V${e.by ? ` (by ${e.by})` : ''}`],
      ]);
    else if (e.kind === 'mark')
      logItem('events', e.host_s, [
        ['kind', 'note: '],
        ['', e.note],
      ]);
    else
      logItem('events', e.host_s, [
        ['kind', `${e.from} → ${e.to}`],
        ['', e.why ? ` (${e.why})` : ''],
      ]);
  }

  /**
   * Three levels of notice, each with its own look: an alarm (a limit or a fault: the cell may
   * be at risk, the load is or should be off), a warning (the run goes on but something needs a
   * look), information (nothing about the figures changes). Unknown kinds count as warnings.
   */
  const NOTICE_LEVEL = {
    over_temperature: 'alarm',
    link_lost: 'alarm',
    fault: 'alarm',
    load_off_unconfirmed: 'alarm',
    link_down: 'warning',
    rig_error: 'warning',
    calibration_rejected: 'warning',
    chemistry_rejected: 'warning',
    unlogged_discharge: 'warning',
    clock_warning: 'info',
  };
  const NOTICE_WORDS = {
    over_temperature: 'over temperature',
    link_lost: 'link to the rig lost',
    fault: 'rig or sensor fault',
    load_off_unconfirmed: 'load off not confirmed',
    link_down: 'rig port gone',
    rig_error: 'rig error',
    calibration_rejected: 'calibration edit rejected',
    chemistry_rejected: 'chemistry edit rejected',
    unlogged_discharge: 'discharge while not logging',
    clock_warning: "rig's clock",
  };
  const LEVEL_TITLE = { alarm: 'Alarm', warning: 'Warning', info: 'Note' };
  const LEVEL_RANK = { info: 0, warning: 1, alarm: 2 };
  let bannerLevel = null;

  function noticeOf(a) {
    const level = NOTICE_LEVEL[a.kind] || 'warning';
    const words = NOTICE_WORDS[a.kind] || String(a.kind).replace(/_/g, ' ');
    // A limit's detail may repeat its kind ("over_temperature: 60.4 °C …"): say it once.
    let detail = String(a.detail || '');
    for (const prefix of [`${a.kind}: `, `${a.kind} `])
      if (detail.startsWith(prefix)) detail = detail.slice(prefix.length);
    return { level, words, detail };
  }

  function addAlarm(a, loud) {
    const n = noticeOf(a);
    logItem(
      'alarms',
      a.host_s,
      [
        ['kind', n.words],
        ['detail', n.detail],
      ],
      true,
      n.level,
    );
    // A lesser notice never hides a standing greater one.
    const banner = $('alarm-banner');
    if (!banner.hidden && LEVEL_RANK[n.level] < LEVEL_RANK[bannerLevel]) return;
    bannerLevel = n.level;
    banner.dataset.level = n.level;
    banner.setAttribute('role', n.level === 'alarm' ? 'alert' : 'status');
    setText('alarm-title', `${LEVEL_TITLE[n.level]}: ${n.words}`);
    setText('alarm-text', `${n.detail} (at ${clock(a.host_s)})`);
    banner.hidden = false;
    if (loud && n.level !== 'info') {
      document.title = `${n.level === 'alarm' ? '⚠' : '!'} ${n.words} · ${baseTitle}`;
      raiseAlert(`cellvigil: ${n.words}`, n.detail, n.level === 'alarm' ? [880, 660, 880] : [660]);
    }
  }

  const LIMIT_REASONS = new Set([
    'over_temperature',
    'link_lost',
    'fault',
    'implausible_reading',
    'open_load',
  ]);
  const REASON_TEXT = {
    cutoff: 'cutoff reached',
    stopped: 'stopped by hand',
    over_temperature: 'over temperature',
    link_lost: 'link to the rig lost',
    fault: 'rig fault',
    implausible_reading: 'readings that cannot be true',
    open_load: 'load on but no current',
    refused: 'refused at start',
  };

  function showResult(r, loud) {
    result = r;
    const reason = resultReason();
    const words = REASON_TEXT[reason] || reason || 'ended';
    const parts = [];
    if (typeof r.capacity_Ah === 'number') parts.push(`${(r.capacity_Ah * 1000).toFixed(0)} mAh`);
    if (typeof r.energy_Wh === 'number') parts.push(`${r.energy_Wh.toFixed(2)} Wh`);
    if (typeof r.duration_s === 'number') parts.push(`in ${clock(r.duration_s)}`);
    if (typeof r.end_voltage_V === 'number') parts.push(`ended at ${r.end_voltage_V.toFixed(3)} V`);
    const banner = $('result-banner');
    banner.dataset.severity = LIMIT_REASONS.has(reason) ? 'limit' : 'normal';
    banner.dataset.reason = reason || '';
    setText('result-title', `Run ended: ${words}`);
    setText('result-text', parts.join(' · '));
    banner.hidden = false;
    setControlsEnabled(false);
    if (loud) {
      document.title = `■ ${words} · ${baseTitle}`;
      raiseAlert(
        `cellvigil: run ended (${words})`,
        parts.join(', '),
        LIMIT_REASONS.has(reason) ? [880, 660, 880] : [523, 784],
      );
    }
    schedule();
  }

  function setControlsEnabled(on) {
    for (const id of ['stop-btn']) $(id).disabled = !on;
    for (const f of ['cutoff-form', 'mark-form']) for (const el of $(f).elements) el.disabled = !on;
  }

  // ---- alerts: sound and notification ---------------------------------------------------
  function beep(freqs) {
    if (!audio) return;
    const t0 = audio.currentTime + 0.02;
    freqs.forEach((f, i) => {
      const osc = audio.createOscillator();
      const gain = audio.createGain();
      osc.type = 'triangle';
      osc.frequency.value = f;
      const start = t0 + i * 0.22;
      gain.gain.setValueAtTime(0.0001, start);
      gain.gain.exponentialRampToValueAtTime(0.25, start + 0.02);
      gain.gain.exponentialRampToValueAtTime(0.0001, start + 0.18);
      osc.connect(gain).connect(audio.destination);
      osc.start(start);
      osc.stop(start + 0.2);
    });
  }

  function raiseAlert(title, body, freqs) {
    if (!alertsOn) return;
    beep(freqs);
    if ('Notification' in window && Notification.permission === 'granted') {
      try {
        new Notification(title, { body, tag: 'cellvigil', icon: '/assets/icon.svg' });
      } catch {
        /* some mobile browsers allow notifications only from a service worker; the sound stays */
      }
    }
  }

  $('alerts-btn').addEventListener('click', async () => {
    alertsOn = !alertsOn;
    if (alertsOn) {
      // Browsers start audio only from a user gesture, so the context is made here.
      const Ctx = window.AudioContext || window.webkitAudioContext;
      if (!audio && Ctx) audio = new Ctx();
      if (audio && audio.state === 'suspended') await audio.resume();
      if ('Notification' in window && Notification.permission === 'default') {
        try {
          await Notification.requestPermission();
        } catch {
          /* refused or unsupported: the sound and the banner still work */
        }
      }
      beep([660]);
    }
    const notes = 'Notification' in window && Notification.permission === 'granted';
    $('alerts-btn').textContent = alertsOn ? (notes ? 'Alerts on' : 'Sound on') : 'Alerts off';
  });

  $('alarm-dismiss').addEventListener('click', () => {
    $('alarm-banner').hidden = true;
    document.title = baseTitle;
  });

  // ---- connection ----------------------------------------------------------------------
  let ws = null;
  let attempt = 0;

  function setLink(kind, text) {
    $('link').dataset.link = kind;
    setText('link-text', text);
  }

  function connect() {
    const scheme = location.protocol === 'https:' ? 'wss:' : 'ws:';
    // A station's channel page follows its own channel (`?channel=<rig>/<n>` in the page address);
    // a fleet view serves this page for one station's channel, named by station and ch.
    const q = new URLSearchParams();
    if (viewerToken) q.set('token', viewerToken);
    for (const k of ['channel', 'station', 'ch']) if (params.has(k)) q.set(k, params.get(k));
    const qs = q.toString();
    setLink('connecting', 'connecting');
    ws = new WebSocket(`${scheme}//${location.host}/live${qs ? `?${qs}` : ''}`);
    ws.addEventListener('message', (ev) => {
      let m;
      try {
        m = JSON.parse(ev.data);
      } catch {
        return;
      }
      if (!m || m.v !== PROTOCOL_VERSION) {
        setLink('down', `daemon speaks protocol ${m && m.v}, page ${PROTOCOL_VERSION}`);
        return;
      }
      handle(m);
    });
    ws.addEventListener('close', () => {
      ws = null;
      for (const [, p] of pending)
        p('not connected: the request may or may not have arrived', false);
      pending.clear();
      const delay =
        Math.min(BACKOFF_MAX_MS, BACKOFF_MIN_MS * 2 ** attempt) * (0.75 + Math.random() * 0.5);
      attempt++;
      setLink('down', `reconnecting in ${Math.ceil(delay / 1000)} s`);
      setTimeout(connect, delay);
    });
  }

  function handle(m) {
    switch (m.type) {
      case 'hello':
        attempt = 0;
        setLink('live', 'live');
        applyHello(m);
        break;
      case 'sample':
        latest = m;
        stateName = m.state;
        ttc = m.time_to_cutoff_s;
        pushPoint(m.host_s, m.voltage_V, m.current_A, m.temperature_C, m.charge_Ah);
        schedule();
        break;
      case 'state':
        stateName = m.to;
        addEvent({ kind: 'state', ...m });
        schedule();
        break;
      case 'mark':
        addEvent({ kind: 'mark', ...m });
        break;
      case 'alarm':
        addAlarm(m, true);
        break;
      case 'cutoff':
        cutoffV = m.cutoff_V;
        if (run) run.cutoff_V = m.cutoff_V;
        addEvent({ kind: 'cutoff', ...m });
        schedule();
        break;
      case 'result':
        showResult(m.result, true);
        break;
      case 'ack':
      case 'error': {
        const done = pending.get(m.id);
        if (done) {
          pending.delete(m.id);
          done(m.type === 'ack' ? 'done' : m.error, m.type === 'ack', m.code);
        }
        break;
      }
      default:
        break;
    }
  }

  function applyHello(h) {
    run = h.run;
    latest = h.status.sample;
    stateName = h.status.state;
    cutoffV = h.status.cutoff_V;
    ttc = h.status.time_to_cutoff_s;
    result = null;
    clearSeries();
    for (const p of h.history.points) pushPoint(p[0], p[1], p[2], p[3], p[4]);
    // The daemon already thinned what it sent; keep thinning new points at the same rate.
    stride = 1;
    seen = 0;
    showRun();
    resetLog('alarms', 'none');
    resetLog('events', 'none yet');
    for (const e of h.events) addEvent(e);
    $('alarm-banner').hidden = true;
    for (const a of h.alarms) addAlarm(a, false);
    $('result-banner').hidden = true;
    setControlsEnabled(Boolean(run));
    if (cutoffV != null && !$('cutoff-input').value) $('cutoff-input').value = cutoffV.toFixed(3);
    if (h.result) showResult(h.result, false);
    schedule();
  }

  // ---- control -------------------------------------------------------------------------
  function reply(text, ok) {
    const el = $('control-reply');
    el.dataset.ok = String(ok);
    el.textContent = text;
  }

  function askToken() {
    if (controlToken) return Promise.resolve(controlToken);
    const dialog = $('token-dialog');
    const input = $('token-input');
    input.value = '';
    return new Promise((resolve) => {
      const finish = (value) => {
        $('token-form').removeEventListener('submit', onSubmit);
        $('token-cancel').removeEventListener('click', onCancel);
        dialog.close();
        resolve(value);
      };
      const onSubmit = (ev) => {
        ev.preventDefault();
        const t = input.value.trim();
        if (!t) return;
        controlToken = t;
        if ($('token-keep').checked) {
          try {
            sessionStorage.setItem(TOKEN_KEY, t);
          } catch {
            /* storage disabled: the token lasts until the page closes */
          }
        }
        finish(t);
      };
      const onCancel = () => finish(null);
      $('token-form').addEventListener('submit', onSubmit);
      $('token-cancel').addEventListener('click', onCancel);
      dialog.showModal();
      input.focus();
    });
  }

  function forgetToken() {
    controlToken = null;
    try {
      sessionStorage.removeItem(TOKEN_KEY);
    } catch {
      /* nothing stored */
    }
  }

  async function control(body, what) {
    const token = await askToken();
    if (!token) return;
    if (!ws || ws.readyState !== WebSocket.OPEN) return reply('not connected to the daemon', false);
    const id = `c${nextId++}`;
    pending.set(id, (text, ok, code) => {
      if (code === 'unauthorized') forgetToken();
      reply(ok ? `${what}: done` : `${what}: ${text}`, ok);
    });
    reply(`${what}: sent…`, true);
    ws.send(JSON.stringify({ ...body, v: PROTOCOL_VERSION, id, token }));
  }

  $('stop-btn').addEventListener('click', () => {
    const dialog = $('confirm-dialog');
    dialog.returnValue = '';
    dialog.addEventListener(
      'close',
      () => {
        if (dialog.returnValue === 'yes') control({ type: 'stop' }, 'stop');
      },
      { once: true },
    );
    dialog.showModal();
  });

  $('cutoff-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const text = $('cutoff-input').value.trim();
    const value = Number(text);
    if (!text || !Number.isFinite(value)) return reply('cutoff: give a number of volts', false);
    if (run && value < run.floor_V)
      return reply(`cutoff: ${value} V is below the floor of ${run.floor_V.toFixed(3)} V`, false);
    // At or above the present voltage the run would end now: a slip more often than a wish.
    const endsNow = latest !== null && value >= latest.voltage_V;
    if (
      endsNow &&
      !window.confirm(
        `${value.toFixed(3)} V is at or above the present ${latest.voltage_V.toFixed(3)} V: the run would end now. Set it anyway?`,
      )
    )
      return reply('cutoff: not changed', false);
    const body = { type: 'set-cutoff', cutoff_V: value, ...(endsNow ? { confirm: true } : {}) };
    control(body, `cutoff ${value.toFixed(3)} V`);
  });

  $('mark-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const note = $('mark-input').value.trim();
    if (!note) return;
    control({ type: 'mark', note }, 'note').then(() => ($('mark-input').value = ''));
  });

  setControlsEnabled(false);
  connect();
})();

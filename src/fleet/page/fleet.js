/* cellvigil fleet page: one WebSocket to /fleet; a section per station, a tile per channel. */
'use strict';

(() => {
  const PROTOCOL_VERSION = 1;
  const BACKOFF_MIN_MS = 500;
  const BACKOFF_MAX_MS = 15000;
  const $ = (id) => document.getElementById(id);
  const viewerToken = new URLSearchParams(location.search).get('token');
  const stations = new Map();
  const tiles = new Map();
  let attempt = 0;
  let drawPending = false;

  const fmt = (x, digits) => (x === null || x === undefined ? '–' : Number(x).toFixed(digits));
  function duration(s) {
    if (s === null || s === undefined) return '–';
    const m = Math.round(s / 60);
    return m >= 60 ? `${Math.floor(m / 60)} h ${m % 60} min` : `${m} min`;
  }

  function el(tag, cls, text) {
    const e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined) e.textContent = text;
    return e;
  }

  function channelHref(t) {
    const q = new URLSearchParams({ station: t.station, ch: String(t.channel) });
    if (viewerToken) q.set('token', viewerToken);
    return `/channel?${q}`;
  }

  function tileNode(t) {
    const a = el('a', `tile${t.alarm && !t.ended ? ' alarm' : ''}`);
    a.href = channelHref(t);
    a.dataset.state = t.state;
    const head = el('div', 'head');
    head.append(
      el('span', 'label', t.label || `channel ${t.channel}`),
      el('span', '', `ch ${t.channel} · ${t.state}`),
    );
    const row1 = el('div', 'row');
    row1.append(
      el('span', '', `${fmt(t.current_A, 3)} A`),
      el('span', '', `${fmt(t.charge_Ah === null ? null : t.charge_Ah * 1000, 0)} mAh`),
    );
    const row2 = el('div', 'row');
    row2.append(
      el('span', '', `${fmt(t.temperature_C, 1)} °C`),
      el('span', '', `cutoff in ${duration(t.time_to_cutoff_s)}`),
    );
    a.append(head, el('div', 'volts', `${fmt(t.voltage_V, 3)} V`), row1, row2);
    if (t.ended) a.append(el('div', 'ended', `ended: ${t.end_reason || 'see the channel'}`));
    else if (t.alarm) a.append(el('div', 'note', t.alarm));
    return a;
  }

  function draw() {
    drawPending = false;
    const root = $('stations');
    const ids = new Set([...stations.keys(), ...[...tiles.values()].map((t) => t.station)]);
    const sections = [...ids].sort().map((id) => {
      const s = stations.get(id);
      const sec = el('section', `station${s && !s.online ? ' offline' : ''}`);
      const h = el('h2', '', id);
      if (s && s.host) h.append(el('span', 'where', `${s.host} · cellvigil ${s.version || ''}`));
      const grid = el('div', 'tiles');
      const mine = [...tiles.values()]
        .filter((t) => t.station === id)
        .sort((a, b) => a.channel - b.channel);
      grid.append(...mine.map(tileNode));
      sec.append(h, grid);
      return sec;
    });
    root.replaceChildren(...sections);
    $('empty').hidden = ids.size > 0;
    const on = [...stations.values()].filter((s) => s.online).length;
    const running = [...tiles.values()].filter((t) => !t.ended && t.state === 'discharging').length;
    $('summary').textContent =
      `${on} of ${ids.size} stations online · ${running} of ${tiles.size} channels discharging`;
  }

  function schedule() {
    if (drawPending) return;
    drawPending = true;
    setTimeout(draw, 250);
  }

  function handle(m) {
    if (m.type === 'fleet') {
      stations.clear();
      tiles.clear();
      for (const s of m.stations) stations.set(s.station, s);
      for (const t of m.tiles) tiles.set(t.key, t);
    } else if (m.type === 'station') stations.set(m.station, m);
    else if (m.type === 'tile') tiles.set(m.key, m);
    schedule();
  }

  function setLink(kind, text) {
    $('link').dataset.link = kind;
    $('link-text').textContent = text;
  }

  function connect() {
    const scheme = location.protocol === 'https:' ? 'wss:' : 'ws:';
    const q = viewerToken ? `?token=${encodeURIComponent(viewerToken)}` : '';
    setLink('connecting', 'connecting');
    const ws = new WebSocket(`${scheme}//${location.host}/fleet${q}`);
    ws.addEventListener('open', () => {
      attempt = 0;
      setLink('live', 'live');
    });
    ws.addEventListener('message', (ev) => {
      let m;
      try {
        m = JSON.parse(ev.data);
      } catch {
        return;
      }
      if (m && m.v === PROTOCOL_VERSION) handle(m);
    });
    ws.addEventListener('close', () => {
      const delay =
        Math.min(BACKOFF_MAX_MS, BACKOFF_MIN_MS * 2 ** attempt) * (0.75 + Math.random() * 0.5);
      attempt++;
      setLink('down', `reconnecting in ${Math.ceil(delay / 1000)} s`);
      setTimeout(connect, delay);
    });
  }

  connect();
})();

/* cellvigil station overview: one WebSocket to /live?view=station, a tile per channel. */
(() => {
  'use strict';

  const PROTOCOL_VERSION = 1;
  const params = new URLSearchParams(location.search);
  const viewerToken = params.get('token');
  const $ = (id) => document.getElementById(id);
  const tiles = new Map();
  const rigs = new Map();
  let ws = null;
  let backoff = 500;

  const fixed = (x, d) => (typeof x === 'number' && Number.isFinite(x) ? x.toFixed(d) : '–');
  const clock = (s) => {
    if (typeof s !== 'number' || !Number.isFinite(s)) return '';
    const t = Math.max(0, Math.round(s));
    const h = Math.floor(t / 3600);
    const m = String(Math.floor((t % 3600) / 60)).padStart(2, '0');
    return `${h}:${m}`;
  };

  /** The detail page of one channel: today's live page, following that channel. */
  function detailHref(channel) {
    const q = new URLSearchParams({ channel });
    if (viewerToken) q.set('token', viewerToken);
    return `/?${q.toString()}`;
  }

  function level(c) {
    const end = c.result && c.result.end_reason;
    const limits = ['over_temperature', 'fault', 'link_lost', 'implausible_reading', 'open_load'];
    if (limits.includes(end)) return 'alarm';
    if (end === 'refused') return 'warn';
    if (end) return 'done';
    if (c.alarm) return 'warn';
    return c.run ? 'running' : 'idle';
  }

  function stateText(c) {
    if (c.result) return String(c.result.end_reason || 'ended');
    if (!c.run) return 'idle';
    return c.status.state || 'waiting';
  }

  function rigSection(rig) {
    const known = rigs.get(rig);
    if (known) return known;
    const sec = document.createElement('section');
    sec.className = 'st-rig';
    sec.dataset.rig = rig;
    const h = document.createElement('h2');
    h.textContent = rig;
    const grid = document.createElement('div');
    grid.className = 'st-tiles';
    sec.append(h, grid);
    $('st-rigs').append(sec);
    rigs.set(rig, grid);
    return grid;
  }

  function tileFor(c) {
    let t = tiles.get(c.channel);
    if (t) return t;
    t = $('st-tile').content.firstElementChild.cloneNode(true);
    t.href = detailHref(c.channel);
    t.querySelector('.st-name').textContent = `ch ${c.ch}`;
    rigSection(c.rig).append(t);
    tiles.set(c.channel, t);
    return t;
  }

  function field(t, name, text) {
    const el = t.querySelector(`[data-f="${name}"]`);
    if (el.textContent !== text) el.textContent = text;
  }

  function draw(c) {
    const t = tileFor(c);
    const s = c.status.sample;
    t.dataset.level = level(c);
    t.querySelector('.st-state').textContent = stateText(c);
    const who = [c.cell_id, c.run ? `${c.run.cells} × ${c.run.chemistry}` : null];
    t.querySelector('.st-cell').textContent = who.filter(Boolean).join(' · ') || 'no cell';
    const charge = c.result ? c.result.capacity_Ah : s && s.charge_Ah;
    field(t, 'voltage', fixed(s && s.voltage_V, 3));
    field(t, 'current', fixed(s && s.current_A, 3));
    field(t, 'charge', typeof charge === 'number' ? (charge * 1000).toFixed(0) : '–');
    field(t, 'temperature', fixed(s && s.temperature_C, 1));
    const ttc = c.result ? '' : clock(c.status.time_to_cutoff_s);
    field(t, 'ttc', ttc ? `to cutoff ${ttc}` : '');
    field(t, 'alarm', c.alarm ? `${c.alarm.kind}: ${c.alarm.detail}` : '');
    t.title = c.alarm ? c.alarm.detail : '';
  }

  function onStation(m) {
    for (const c of m.channels) draw(c);
    const running = m.channels.filter((c) => c.run && !c.result).length;
    $('st-count').textContent = `${m.channels.length} channels, ${running} running`;
  }

  function setLink(state, text) {
    $('st-link').dataset.link = state;
    $('st-link-text').textContent = text;
  }

  function connect() {
    const scheme = location.protocol === 'https:' ? 'wss:' : 'ws:';
    const q = new URLSearchParams({ view: 'station' });
    if (viewerToken) q.set('token', viewerToken);
    ws = new WebSocket(`${scheme}//${location.host}/live?${q.toString()}`);
    ws.onopen = () => {
      backoff = 500;
      setLink('live', 'live');
    };
    ws.onmessage = (e) => {
      let m;
      try {
        m = JSON.parse(e.data);
      } catch {
        return;
      }
      if (m.v !== PROTOCOL_VERSION) return;
      if (m.type === 'station') onStation(m);
      // Events arrive at once; the next overview (a fraction of a second) redraws the tile.
    };
    ws.onclose = () => {
      setLink('connecting', `reconnecting in ${Math.ceil(backoff / 1000)} s`);
      setTimeout(connect, backoff);
      backoff = Math.min(15000, backoff * 2);
    };
  }

  connect();
})();

// Sharing views drawn on plain canvases: each unit's droop characteristic and each tie's
// power-angle curve, with the live operating point.

const INK = '#14202b';
const MUTED = '#7a8792';
const LINE = '#0b5cad';
const POINT = '#d9480f';

function prepare(canvas) {
  const ratio = window.devicePixelRatio || 1;
  const w = canvas.clientWidth || 240;
  const h = canvas.clientHeight || 160;
  if (canvas.width !== Math.round(w * ratio)) {
    canvas.width = Math.round(w * ratio);
    canvas.height = Math.round(h * ratio);
  }
  const ctx = canvas.getContext('2d');
  ctx.setTransform(ratio, 0, 0, ratio, 0, 0);
  ctx.clearRect(0, 0, w, h);
  ctx.font = '11px system-ui, sans-serif';
  return { ctx, w, h };
}

function frame(ctx, w, h, pad) {
  ctx.strokeStyle = MUTED;
  ctx.lineWidth = 1;
  ctx.strokeRect(pad.l, pad.t, w - pad.l - pad.r, h - pad.t - pad.b);
}

/** Frequency against output along the droop line, deadband flat, limits as dashed verticals. */
export function drawDroop(canvas, unit, live, f0, fArea) {
  const { ctx, w, h } = prepare(canvas);
  const pad = { l: 42, r: 8, t: 8, b: 22 };
  const lo = unit.min_mw, hi = unit.max_mw;
  const span = Math.max(hi - lo, 1e-6);
  const pMin = lo - 0.05 * span, pMax = hi + 0.05 * span;
  const R = live.droop, db = live.deadband_hz, S = unit.rating_mw;
  const pRef = live.setpoint_mw + (live.agc_mw || 0);
  // Frequency range: the droop line across the limits, plus the operating point.
  const fAt = (p) => {
    const d = (p - pRef) / S * R * f0; // frequency drop that calls for p
    const off = unit.governor.deadband === 'step' ? 0 : db;
    if (Math.abs(d) < 1e-12) return f0;
    return f0 - d - Math.sign(d) * off;
  };
  const fs = [fAt(lo), fAt(hi), f0 + db, f0 - db, fArea];
  let fLo = Math.min(...fs), fHi = Math.max(...fs);
  const fPad = Math.max(0.02, 0.1 * (fHi - fLo));
  fLo -= fPad; fHi += fPad;
  const x = (p) => pad.l + (p - pMin) / (pMax - pMin) * (w - pad.l - pad.r);
  const y = (f) => pad.t + (fHi - f) / (fHi - fLo) * (h - pad.t - pad.b);
  frame(ctx, w, h, pad);
  // nominal
  ctx.strokeStyle = '#c9d0d6';
  ctx.beginPath(); ctx.moveTo(pad.l, y(f0)); ctx.lineTo(w - pad.r, y(f0)); ctx.stroke();
  // limits
  ctx.setLineDash([4, 3]);
  ctx.strokeStyle = MUTED;
  for (const p of [lo, hi]) { ctx.beginPath(); ctx.moveTo(x(p), pad.t); ctx.lineTo(x(p), h - pad.b); ctx.stroke(); }
  ctx.setLineDash([]);
  // droop line (with the deadband as a flat stretch at the reference)
  ctx.strokeStyle = LINE;
  ctx.lineWidth = 2;
  ctx.beginPath();
  const pts = [];
  for (let i = 0; i <= 60; i++) {
    const p = lo + (hi - lo) * i / 60;
    pts.push([p, fAt(p)]);
  }
  pts.forEach(([p, f], i) => (i ? ctx.lineTo(x(p), y(f)) : ctx.moveTo(x(p), y(f))));
  if (db > 0) { ctx.moveTo(x(pRef), y(f0 + db)); ctx.lineTo(x(pRef), y(f0 - db)); }
  ctx.stroke();
  // operating point
  ctx.fillStyle = POINT;
  ctx.beginPath(); ctx.arc(x(live.p_mw), y(fArea), 4.5, 0, 2 * Math.PI); ctx.fill();
  ctx.fillStyle = INK;
  ctx.fillText(`${fHi.toFixed(2)}`, 2, pad.t + 9);
  ctx.fillText(`${fLo.toFixed(2)}`, 2, h - pad.b);
  ctx.fillText(`${lo.toFixed(0)}`, pad.l, h - 6);
  const hiText = `${hi.toFixed(0)} MW`;
  ctx.fillText(hiText, w - pad.r - ctx.measureText(hiText).width, h - 6);
}

/** Transfer against angle, pmax sin(delta), with the operating point and the pull-out points. */
export function drawPowerAngle(canvas, tie, live) {
  const { ctx, w, h } = prepare(canvas);
  const pad = { l: 42, r: 8, t: 8, b: 22 };
  const pmax = tie.pmax_mw;
  const x = (deg) => pad.l + (deg + 180) / 360 * (w - pad.l - pad.r);
  const y = (p) => pad.t + (1.15 * pmax - p) / (2.3 * pmax) * (h - pad.t - pad.b);
  frame(ctx, w, h, pad);
  ctx.strokeStyle = '#c9d0d6';
  ctx.beginPath(); ctx.moveTo(pad.l, y(0)); ctx.lineTo(w - pad.r, y(0)); ctx.stroke();
  ctx.strokeStyle = LINE;
  ctx.lineWidth = 2;
  ctx.beginPath();
  for (let d = -180; d <= 180; d += 3) {
    const p = pmax * Math.sin(d * Math.PI / 180);
    d === -180 ? ctx.moveTo(x(d), y(p)) : ctx.lineTo(x(d), y(p));
  }
  ctx.stroke();
  ctx.fillStyle = INK;
  for (const d of [90, -90]) {
    const p = pmax * Math.sin(d * Math.PI / 180);
    ctx.beginPath();
    ctx.moveTo(x(d), y(p) - 5); ctx.lineTo(x(d) + 5, y(p)); ctx.lineTo(x(d), y(p) + 5); ctx.lineTo(x(d) - 5, y(p));
    ctx.fill();
  }
  if (live.in_service) {
    const wrapped = ((live.angle_deg + 180) % 360 + 360) % 360 - 180;
    ctx.fillStyle = POINT;
    ctx.beginPath(); ctx.arc(x(wrapped), y(live.flow_mw), 4.5, 0, 2 * Math.PI); ctx.fill();
  } else {
    ctx.fillStyle = '#b00020';
    ctx.fillText('open', w / 2 - 12, pad.t + 14);
  }
  ctx.fillStyle = INK;
  ctx.fillText(`${pmax.toFixed(0)}`, 2, y(pmax) + 4);
  ctx.fillText(`-180°`, pad.l, h - 6);
  ctx.fillText(`180°`, w - pad.r - 26, h - 6);
}

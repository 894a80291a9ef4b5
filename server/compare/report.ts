// Self-contained printable reports: one HTML string each, inline CSS and inline SVG, no script and no
// external resource, so a report opens the same from a USB stick in ten years. Pure: data in, text out.

import type { SampleBatch } from '../api/messages.js';
import type { SessionRecord } from '../store/types.js';
import type { Comparison } from './compare.js';
import { G0, measuredPoints } from './curve.js';
import { esc, linePlot, PALETTE } from './svg.js';

export const SAFETY_CAUTIONS: readonly string[] = [
  'Keep yourself and others out of the propeller’s plane of rotation while the motor is powered.',
  'Wear eye protection at the bench.',
  'Secure the stand to the bench and the propeller to the motor before every run; remove the propeller while configuring the ESC.',
  'Charge, use and store lithium batteries supervised, in a fire-safe place.',
  'Follow local codes and your lab’s rules; the software stop does not replace a hard-wired power cut.',
];

const CSS = `
*{box-sizing:border-box}body{font:13px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1b1b1b;margin:24px auto;max-width:1000px;padding:0 16px}
h1{font-size:22px;margin:0 0 4px}h2{font-size:16px;margin:26px 0 8px;border-bottom:1px solid #ccc;padding-bottom:3px}
.meta{color:#555}.tag{display:inline-block;border:1px solid #9ab;border-radius:3px;padding:0 5px;margin-right:4px;font-size:12px}
.outcome{font-weight:600;padding:1px 6px;border-radius:3px;background:#e8eef5}.outcome.tripped,.outcome.interrupted,.outcome.aborted{background:#fbe3d6}
table{border-collapse:collapse;margin:6px 0;font-variant-numeric:tabular-nums}th,td{border:1px solid #d3d3d3;padding:3px 7px;text-align:right;vertical-align:top}td{white-space:nowrap}td.l{white-space:normal}
th{background:#f1f3f5;font-weight:600}td.l,th.l{text-align:left}
.safety{border:2px solid #b33;background:#fff6f4;padding:8px 12px;margin:14px 0}.safety h2{border:0;margin:0 0 4px;color:#922}.safety ul{margin:0;padding-left:20px}
.notes li,.verdict li{margin:3px 0}.loses{color:#a12a1a;font-weight:600}.wins{color:#1c6b2e;font-weight:600}
svg{max-width:100%;height:auto;display:block;margin:8px 0}svg .pt{font-size:13px;font-weight:600}svg .pl{font-size:11px;fill:#333}svg .pa{font-size:12px;fill:#222}
svg .pg{stroke:#e2e2e2;stroke-width:1}svg .pf{fill:none;stroke:#999}
.grid2{display:grid;grid-template-columns:1fr 1fr;gap:10px}.muted{color:#777}
@media print{body{margin:0;max-width:none;font-size:11px}h2{break-after:avoid}table,svg,.safety{break-inside:avoid}.grid2{grid-template-columns:1fr 1fr}a{color:inherit}}
`;

function page(title: string, body: string): string {
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width,initial-scale=1"><title>${esc(title)}</title><style>${CSS}</style></head><body>${body}</body></html>\n`;
}

function time(t: number | null | undefined): string {
  if (t === null || t === undefined || !Number.isFinite(t)) return '—';
  return new Date(t).toISOString().replace('T', ' ').slice(0, 19) + ' UTC';
}

function num(x: number | null | undefined, d = 2): string {
  return x === null || x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(d);
}

function pm(mean: number | null | undefined, sd: number | null | undefined, d = 2): string {
  if (mean === null || mean === undefined || !Number.isFinite(mean)) return '—';
  return sd === null || sd === undefined || !Number.isFinite(sd) ? mean.toFixed(d) : `${mean.toFixed(d)} ± ${sd.toFixed(d)}`;
}

function safety(): string {
  return `<section class="safety"><h2>Safety</h2><ul>${SAFETY_CAUTIONS.map((c) => `<li>${esc(c)}</li>`).join('')}</ul></section>`;
}

/** Nested JSON as key/value rows ("propeller.diameter_m  0.254"). */
function kvTable(obj: unknown, empty: string): string {
  if (obj === null || obj === undefined || (typeof obj === 'object' && Object.keys(obj as object).length === 0)) return `<p class="muted">${esc(empty)}</p>`;
  const rows: string[] = [];
  const walk = (v: unknown, key: string) => {
    if (v !== null && typeof v === 'object' && !Array.isArray(v)) {
      for (const [k, x] of Object.entries(v as Record<string, unknown>)) walk(x, key ? `${key}.${k}` : k);
    } else {
      if (v === undefined) return;
      const show = (x: unknown) => (typeof x === 'number' && !Number.isInteger(x) ? String(Number(x.toPrecision(6))) : String(x));
      const text = Array.isArray(v) ? (v.length > 12 ? `${v.length} values` : v.map(show).join(', ')) : v === null ? '—' : show(v);
      rows.push(`<tr><th class="l">${esc(key)}</th><td class="l">${esc(text)}</td></tr>`);
    }
  };
  walk(obj, '');
  return `<table>${rows.join('')}</table>`;
}

function tags(list: readonly string[]): string {
  return list.map((t) => `<span class="tag">${esc(t)}</span>`).join('') || '<span class="muted">no tags</span>';
}

/** One session: context, operating points, events, and (when given) its recording thinned for the plots. */
export function renderSessionReport(s: SessionRecord, samples?: SampleBatch): string {
  const parts: string[] = [];
  parts.push(`<h1>${esc(s.title || `Session ${s.id}`)}</h1>`);
  parts.push(
    `<p class="meta">Session ${s.id} · <span class="outcome ${esc(s.outcome)}">${esc(s.outcome)}</span> · ${time(s.started_at)} to ${time(s.ended_at)} · rig ${esc(s.rig_name ?? 'not recorded')} · ${s.sample_count} samples · ${s.point_count} operating points</p>`,
  );
  parts.push(`<p>${tags(s.tags)}</p>`);
  if (s.notes) parts.push(`<p>${esc(s.notes).replace(/\n/g, '<br>')}</p>`);
  parts.push(safety());

  if (samples && samples.t.length > 0) {
    const t0 = samples.t[0];
    const secs = samples.t.map((t) => (t - t0) / 1000);
    parts.push('<h2>Recording</h2><div class="grid2">');
    parts.push(linePlot({ title: 'Thrust', xLabel: 'time (s)', yLabel: 'thrust (N)', width: 480, height: 240, series: [{ name: 'thrust', x: secs, y: samples.thrust, color: PALETTE[0] }] }));
    parts.push(linePlot({ title: 'Electrical power', xLabel: 'time (s)', yLabel: 'power (W)', width: 480, height: 240, series: [{ name: 'power', x: secs, y: samples.power, color: PALETTE[1] }] }));
    parts.push('</div>');
  }

  parts.push('<h2>Operating points</h2>');
  const mp = measuredPoints(s.points);
  if (mp.length >= 2) {
    const sorted = [...mp].sort((a, b) => a.thrust_N - b.thrust_N);
    parts.push('<div class="grid2">');
    parts.push(
      linePlot({
        title: 'Power against thrust',
        xLabel: 'thrust (N)',
        yLabel: 'electrical power (W)',
        width: 480,
        height: 260,
        yZero: true,
        series: [{ name: 'measured', x: sorted.map((p) => p.thrust_N), y: sorted.map((p) => p.power_W), err: sorted.map((p) => p.power_std_W), color: PALETTE[0], markers: true }],
      }),
    );
    parts.push(
      linePlot({
        title: 'Efficiency',
        xLabel: 'thrust (N)',
        yLabel: 'grams per watt (g/W)',
        width: 480,
        height: 260,
        yZero: true,
        series: [{ name: 'measured', x: sorted.map((p) => p.thrust_N), y: sorted.map((p) => p.grams_per_watt), color: PALETTE[2], markers: true }],
      }),
    );
    parts.push('</div>');
  }
  if (s.points.length === 0) parts.push('<p class="muted">No operating points were recorded.</p>');
  else {
    parts.push(
      '<table><tr><th>#</th><th>throttle</th><th>thrust (N)</th><th>voltage (V)</th><th>current (A)</th><th>power (W)</th><th>rpm</th><th>g/W</th><th>FM</th><th>predicted g/W</th><th>band g/W</th><th>deviation (%)</th><th>settled</th></tr>',
    );
    for (const p of s.points) {
      const c = p.channels;
      parts.push(
        `<tr><td>${p.index}</td><td>${num(p.throttle, 3)}</td><td>${pm(c.thrust?.mean, c.thrust?.std, 3)}</td><td>${pm(c.voltage?.mean, c.voltage?.std, 2)}</td><td>${pm(c.current?.mean, c.current?.std, 2)}</td><td>${pm(c.power?.mean, c.power?.std, 1)}</td><td>${pm(c.rpm?.mean, c.rpm?.std, 0)}</td><td>${num(p.grams_per_watt, 2)}</td><td>${num(p.figure_of_merit, 3)}</td><td>${num(p.predicted?.grams_per_watt, 2)}</td><td>${p.predicted?.grams_per_watt_lo !== undefined ? `${num(p.predicted.grams_per_watt_lo, 2)} to ${num(p.predicted.grams_per_watt_hi ?? Infinity, 2)}` : '—'}</td><td>${num(p.deviation_pct, 1)}${p.within_band === false ? ' (outside the band)' : ''}</td><td>${p.settled ? 'yes' : 'no'}</td></tr>`,
      );
    }
    parts.push('</table><p class="muted">Values are mean ± sample standard deviation over each measurement window; the band is the prediction\'s uncertainty at two standard uncertainties.</p>');
  }
  // The zero the run started from and its drift over the run (server/bench/zero-service.ts).
  const zeroEvents = s.events.filter((e) => e.kind === 'zero' || e.kind === 'zero_drift');
  if (zeroEvents.length) parts.push('<h2>Zero</h2><ul>', ...zeroEvents.map((e) => `<li${e.level === 'warn' ? ' class="warn"' : ''}>${esc(e.text)}</li>`), '</ul>');

  parts.push('<h2>Rig</h2>', kvTable(s.rig && { ...s.rig, sim: undefined }, 'No rig snapshot was recorded.'));
  parts.push('<h2>Calibration in force</h2>');
  if (s.calibration) {
    parts.push('<table><tr><th class="l">channel</th><th>scale</th><th>offset</th></tr>');
    for (const [ch, c] of Object.entries(s.calibration)) parts.push(`<tr><td class="l">${esc(ch)}</td><td>${num(c.scale, 6)}</td><td>${num(c.offset, 6)}</td></tr>`);
    parts.push('</table>');
  } else parts.push('<p class="muted">No calibration was recorded.</p>');
  parts.push('<h2>Atmosphere</h2>', kvTable(s.atmosphere, 'No atmosphere was recorded.'));
  parts.push('<h2>Device</h2>', kvTable(s.firmware, 'No firmware identity was recorded.'));
  if (s.sequence !== null && s.sequence !== undefined) parts.push('<h2>Sequence</h2>', kvTable(s.sequence, ''));

  parts.push('<h2>Events</h2>');
  if (s.events.length === 0) parts.push('<p class="muted">No events.</p>');
  else {
    parts.push('<table><tr><th class="l">time</th><th class="l">level</th><th class="l">kind</th><th class="l">what happened</th></tr>');
    for (const e of s.events.slice(0, 500)) {
      const data = e.data === undefined ? '' : ` <span class="muted">${esc(JSON.stringify(e.data).slice(0, 200))}</span>`;
      parts.push(`<tr><td class="l">${time(e.t)}</td><td class="l">${esc(e.level)}</td><td class="l">${esc(e.kind)}</td><td class="l">${esc(e.text)}${data}</td></tr>`);
    }
    parts.push('</table>');
    if (s.events.length > 500) parts.push(`<p class="muted">${s.events.length - 500} more events not shown.</p>`);
  }
  parts.push(`<p class="muted">ductbench session report, generated ${time(Date.now())}.</p>`);
  return page(s.title || `Session ${s.id}`, parts.join('\n'));
}

/** A comparison: curves, savings with error bars and the ideal line, the grid table, notes and the verdict. */
export function renderComparisonReport(c: Comparison, opts: { generatedAt?: number } = {}): string {
  const parts: string[] = [];
  const name = (id: number) => {
    const s = c.sessions.find((x) => x.session === id);
    return s ? `#${id} ${s.title}` : `#${id}`;
  };
  parts.push(`<h1>Duct comparison against ${esc(name(c.baseline))}</h1>`);
  parts.push(
    `<p class="meta">${c.sessions.length} sessions · common thrust range ${c.common_range_N ? `${num(c.common_range_N[0])}–${num(c.common_range_N[1])} N` : 'none'} · g0 = ${G0} m/s²</p>`,
  );
  parts.push(safety());

  parts.push('<h2>Sessions</h2><table><tr><th>session</th><th class="l">title</th><th class="l">rig</th><th>sigma</th><th>duct mass (g)</th><th>points</th><th>thrust range (N)</th><th class="l">compared</th></tr>');
  for (const s of c.sessions) {
    parts.push(
      `<tr><td>${s.session}${s.session === c.baseline ? ' (baseline)' : ''}</td><td class="l">${esc(s.title)}</td><td class="l">${esc(s.rig_name ?? '—')}</td><td>${s.ducted ? num(s.sigma, 3) : 'open'}</td><td>${num(s.duct_mass_kg * 1000, 0)}</td><td>${s.points.length}</td><td>${s.thrust_range_N ? `${num(s.thrust_range_N[0])}–${num(s.thrust_range_N[1])}` : '—'}</td><td class="l">${s.compared ? 'yes' : 'no'}</td></tr>`,
    );
  }
  parts.push('</table>');

  parts.push('<h2>Power against thrust</h2>');
  parts.push(
    linePlot({
      title: 'Measured operating points (mean ± std of power)',
      xLabel: 'thrust (N)',
      yLabel: 'electrical power (W)',
      yZero: true,
      width: 900,
      height: 340,
      series: c.sessions.map((s, i) => {
        const pts = [...s.points].sort((a, b) => a.thrust_N - b.thrust_N);
        return { name: name(s.session), x: pts.map((p) => p.thrust_N), y: pts.map((p) => p.power_W), err: pts.map((p) => p.power_std_W), color: PALETTE[i % PALETTE.length], markers: true };
      }),
    }),
  );

  const others = [...new Set(c.rows.map((r) => r.session))];
  if (others.length) {
    parts.push('<h2>Power saving at equal thrust</h2>');
    const series = others.flatMap((id, i) => {
      const rows = c.rows.filter((r) => r.session === id);
      const color = PALETTE[c.sessions.findIndex((s) => s.session === id) % PALETTE.length] ?? PALETTE[i % PALETTE.length];
      return [
        { name: `${name(id)}, measured`, x: rows.map((r) => r.thrust_N), y: rows.map((r) => r.power_saving_pct), err: rows.map((r) => r.power_saving_std_pct), color, markers: true },
        { name: `${name(id)}, ideal for its sigma`, x: rows.map((r) => r.thrust_N), y: rows.map((r) => r.ideal_saving_pct), color, dashed: true },
      ];
    });
    parts.push(linePlot({ title: 'Saving against the baseline (dashed: momentum-theory ideal for the duct’s sigma)', xLabel: 'thrust (N)', yLabel: 'power saving (%)', yZero: true, width: 900, height: 320, series }));
    for (const id of others) {
      parts.push(`<h2>${esc(name(id))} against the baseline</h2>`);
      parts.push(
        '<table><tr><th>thrust (N)</th><th>baseline power (W)</th><th>power (W)</th><th>saving (%)</th><th>ideal saving (%)</th><th>effectiveness</th><th>thrust at equal power (N)</th><th>thrust gain (%)</th><th>net thrust (N)</th><th>net gain (%)</th><th>g/W</th><th>baseline g/W</th></tr>',
      );
      for (const r of c.rows.filter((x) => x.session === id)) {
        parts.push(
          `<tr><td>${num(r.thrust_N)}</td><td>${pm(r.baseline_power_W, r.baseline_power_std_W, 1)}</td><td>${pm(r.power_W, r.power_std_W, 1)}</td><td>${pm(r.power_saving_pct, r.power_saving_std_pct, 1)}</td><td>${num(r.ideal_saving_pct, 1)}</td><td>${num(r.duct_effectiveness, 2)}</td><td>${num(r.thrust_at_equal_power_N)}</td><td>${pm(r.thrust_gain_pct, r.thrust_gain_std_pct, 1)}</td><td>${num(r.net_thrust_N)}</td><td>${num(r.net_thrust_gain_pct, 1)}</td><td>${num(r.grams_per_watt)}</td><td>${num(r.baseline_grams_per_watt)}</td></tr>`,
        );
      }
      parts.push('</table>');
    }
    parts.push(
      '<p class="muted">± is one standard deviation from the scatter of thrust and power in each measurement window, carried through the curves. Net thrust is thrust minus the duct’s weight. — means not measured there: nothing is extrapolated.</p>',
    );
  }
  if (c.notes.length) parts.push('<h2>Notes</h2><ul class="notes">', ...c.notes.map((n) => `<li>${esc(n)}</li>`), '</ul>');
  if (c.verdict) {
    const v = c.verdict;
    parts.push(`<h2>Vehicle verdict</h2><p>All-up mass ${num(v.vehicle.mass_kg, 3)} kg without ducts, ${v.vehicle.motors} motors, ${num(v.vehicle.battery_wh, 1)} Wh battery, hover.</p>`);
    parts.push('<ul class="verdict">');
    v.text.forEach((t, i) => {
      const o = v.sessions[i]?.outcome;
      const cls = o === 'loses' ? 'loses' : o === 'wins' ? 'wins' : '';
      parts.push(`<li${cls ? ` class="${cls}"` : ''}>${esc(t)}</li>`);
    });
    parts.push('</ul>');
    parts.push('<table><tr><th>session</th><th>hover thrust / motor (N)</th><th>of it for the duct (N)</th><th>power / motor (W)</th><th>total (W)</th><th>endurance (min)</th><th>break-even duct mass (g)</th></tr>');
    for (const r of v.sessions) {
      parts.push(
        `<tr><td>${r.session}</td><td>${num(r.hover_thrust_per_motor_N)}</td><td>${num(r.duct_weight_N)}</td><td>${pm(r.power_per_motor_W, r.power_per_motor_std_W, 1)}</td><td>${num(r.total_power_W, 1)}</td><td>${num(r.endurance_min, 1)}</td><td>${r.break_even_duct_mass_kg === null ? '—' : num(r.break_even_duct_mass_kg * 1000, 0)}</td></tr>`,
      );
    }
    parts.push('</table>');
  }
  parts.push(`<p class="muted">ductbench comparison report, generated ${time(opts.generatedAt ?? Date.now())}.</p>`);
  return page(`Duct comparison against session ${c.baseline}`, parts.join('\n'));
}

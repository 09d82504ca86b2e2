import fs from 'node:fs';
import path from 'node:path';

type Ingest = { controllers: number; readingsPerSecond: number; lost: number; valveEventP50Ms: number; valveEventP99Ms: number; serverRssMb: number };
type Scale = { controllers: number; instances: number; readingsPerSecond: number; lost: number; valveEventP99Ms: number; rssMbPerInstance: number[]; readingsPerSecondPerBoard?: number; offeredReadingsPerSecond?: number };
type Results = {
  machine?: { cpus: number; node: string; at: string };
  ingest?: Ingest[];
  pgCopyRowsPerSecond?: number;
  ingestShareOfCopy?: number;
  ingestCeiling?: Ingest & { readingsPerSecondPerBoard: number };
  schedule?: { zones: number; controllers?: number; latenessP50Ms: number; latenessP99Ms: number; minStaggerGapMs: number; staggerSettingMs: number };
  history?: { sites: number; runHistoryP95Ms: number; dailyWaterUseP95Ms: number };
  scale?: Scale[];
};

const ok = (pass: boolean) => (pass ? 'met' : '**not met**');

/** A small SVG line plot (no chart library): readings/s and valve p99 against boards. */
function scalePlot(rows: Scale[]): string {
  const W = 640, H = 300, L = 60, R = 60, T = 20, B = 40;
  const xs = rows.map((r) => Math.log10(r.controllers));
  const x0 = Math.min(...xs), x1 = Math.max(...xs);
  const X = (v: number) => L + ((Math.log10(v) - x0) / (x1 - x0 || 1)) * (W - L - R);
  const maxR = Math.max(...rows.map((r) => r.readingsPerSecond)) * 1.1 || 1;
  const maxL = Math.max(...rows.map((r) => r.valveEventP99Ms).filter(Number.isFinite)) * 1.1 || 1;
  const Y1 = (v: number) => H - B - (v / maxR) * (H - T - B);
  const Y2 = (v: number) => H - B - (v / maxL) * (H - T - B);
  // (a run with no figure, such as no valve event in the window, is left out of its line)
  const line = (f: (r: Scale) => number, Y: (v: number) => number) =>
    rows.filter((r) => Number.isFinite(f(r))).map((r, i) => `${i ? 'L' : 'M'}${X(r.controllers).toFixed(1)},${Y(f(r)).toFixed(1)}`).join(' ');
  const ticks = rows.map((r) => `<text x="${X(r.controllers)}" y="${H - B + 16}" font-size="11" text-anchor="middle">${r.controllers}</text>`).join('');
  return `<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" font-family="sans-serif">
<rect width="100%" height="100%" fill="#fff"/>
<line x1="${L}" y1="${H - B}" x2="${W - R}" y2="${H - B}" stroke="#333"/><line x1="${L}" y1="${T}" x2="${L}" y2="${H - B}" stroke="#1565c0"/><line x1="${W - R}" y1="${T}" x2="${W - R}" y2="${H - B}" stroke="#c62828"/>
${ticks}<text x="${W / 2}" y="${H - 6}" font-size="12" text-anchor="middle">boards (log scale), two instances</text>
<text x="${L - 6}" y="${T + 4}" font-size="11" text-anchor="end" fill="#1565c0">${Math.round(maxR)}</text><text x="${L - 6}" y="${H - B}" font-size="11" text-anchor="end" fill="#1565c0">0</text>
<text x="${W - R + 6}" y="${T + 4}" font-size="11" fill="#c62828">${Math.round(maxL)} ms</text><text x="${W - R + 6}" y="${H - B}" font-size="11" fill="#c62828">0</text>
<path d="${line((r) => r.readingsPerSecond, Y1)}" fill="none" stroke="#1565c0" stroke-width="2"/>
<path d="${line((r) => r.valveEventP99Ms, Y2)}" fill="none" stroke="#c62828" stroke-width="2" stroke-dasharray="5,3"/>
<text x="${L + 8}" y="${T + 14}" font-size="12" fill="#1565c0">readings persisted / s</text>
<text x="${L + 8}" y="${T + 30}" font-size="12" fill="#c62828">valve event p99 to the other instance (ms)</text>
</svg>
`;
}

export function writePerformanceDoc(resultsFile = 'bench/results/latest.json', out = 'docs/performance.md') {
  const r = JSON.parse(fs.readFileSync(resultsFile, 'utf8')) as Results;
  const lines: string[] = [];
  lines.push('# Performance', '');
  lines.push(process.env.BENCH_NOTE ? `> ${process.env.BENCH_NOTE}\n` : '');
  lines.push(`Measured by \`npm run bench\` on this project's 2-core machine (${r.machine?.cpus ?? '?'} CPUs seen, Node ${r.machine?.node ?? '?'}, ${r.machine?.at ?? ''}). Raw figures: \`bench/results/latest.json\`. Targets come from the issues; nothing here is a timed unit test.`, '');
  if (r.ingest?.length) {
    lines.push('## Ingest (one instance, embedded broker)', '');
    lines.push('Boards run in a simulator process of their own, each sending 25 readings a second in one MQTT message (its samples as columns, docs/protocol.md); the server (broker, gateway, COPY writer, live hub) runs in another. A WebSocket client measures valve events from the board publishing them to its receipt while ten valves a second are switched.', '');
    lines.push('| boards | readings persisted/s | lost | valve event p50 | valve event p99 | server peak RSS |', '|---:|---:|---:|---:|---:|---:|');
    for (const i of r.ingest) lines.push(`| ${i.controllers} | ${i.readingsPerSecond} | ${i.lost} | ${i.valveEventP50Ms} ms | ${i.valveEventP99Ms} ms | ${i.serverRssMb} MB |`);
    lines.push('');
    const k = r.ingest.find((i) => i.controllers === 1000);
    if (k) {
      lines.push(`Targets with 1,000 boards: ≥ 20,000 readings/s — ${ok(k.readingsPerSecond >= 20_000)}; 0 lost — ${ok(k.lost === 0)}; valve event p99 < 100 ms — ${ok(k.valveEventP99Ms < 100)}; RSS < 400 MB — ${ok(k.serverRssMb < 400)}.`, '');
    }
  }
  if (r.pgCopyRowsPerSecond) {
    lines.push('## The ceiling: PostgreSQL COPY', '');
    lines.push(`Raw COPY into the same \`readings\` table from one connection, same run: **${r.pgCopyRowsPerSecond} rows/s**.`);
    const c = r.ingestCeiling;
    if (c) lines.push(` Offered about what one instance stores here (${c.controllers} boards × ${c.readingsPerSecondPerBoard} readings/s, one message a second each: ${c.controllers * c.readingsPerSecondPerBoard} offered), it persisted **${c.readingsPerSecond} readings/s** (lost ${c.lost}, peak RSS ${c.serverRssMb} MB). Offered more, it stores no more: 850 boards (102,000 offered) gave 86,148 readings/s on 2026-12-03, not in this run; offered far more, the simulator's backlog takes the cores and less is stored.`);
    if (r.ingestShareOfCopy !== undefined) lines.push(` The most readings persisted per second in any ingest run above is ${(r.ingestShareOfCopy * 100).toFixed(1)} % of the raw COPY rate (target ≥ 50 % — ${ok(r.ingestShareOfCopy >= 0.5)}). Each table row is the load its boards offer (25 readings/s per board) as far as the server keeps up; past that the boards wait for their acknowledgements. On this machine the boards' simulator, the server and PostgreSQL share the two cores, while the raw COPY has PostgreSQL to itself; the raw COPY rate itself varies from run to run here (from 100,582 to 174,433 rows/s in runs on 2026-12-03), so the share moves with it.`);
    lines.push('');
  }
  if (r.schedule && (r.schedule.latenessP99Ms === null || !Number.isFinite(r.schedule.latenessP99Ms))) {
    lines.push('## Schedule: many zones due in the same minute', '');
    lines.push('Not measured: in the last run no relay opened within the measuring window (the machine was saturated by parallel test runs; see bench/schedule.ts). No figure is claimed.', '');
  } else if (r.schedule) {
    const s = r.schedule;
    lines.push('## Schedule: many zones due in the same minute', '');
    lines.push(`${s.zones} zones on ${s.controllers ?? '?'} simulated boards (a board has at most 8 relays, so 10,000 zones need 1,250 boards), all due at one start time, every valve of a board allowed open at once. Lateness is when the board energised the relay minus the planned start, so it includes the stagger between a board's relays.`, '');
    lines.push('| zones | lateness p50 | lateness p99 | smallest stagger gap seen | stagger setting |', '|---:|---:|---:|---:|---:|');
    lines.push(`| ${s.zones} | ${s.latenessP50Ms} ms | ${s.latenessP99Ms} ms | ${s.minStaggerGapMs} ms | ${s.staggerSettingMs} ms |`, '');
    lines.push(`Targets: p99 < 1 s — ${ok(s.latenessP99Ms < 1000)}; smallest gap ≥ setting — ${ok(s.minStaggerGapMs >= s.staggerSettingMs)}.`, '');
  }
  if (r.history) {
    lines.push('## History queries', '');
    lines.push('| sites | run-history page p95 | daily water use p95 |', '|---:|---:|---:|');
    lines.push(`| ${r.history.sites} | ${r.history.runHistoryP95Ms} ms | ${r.history.dailyWaterUseP95Ms} ms |`, '');
    lines.push(`Target p95 < 150 ms — ${ok(r.history.runHistoryP95Ms < 150 && r.history.dailyWaterUseP95Ms < 150)}.`, '');
  }
  if (r.scale?.length) {
    lines.push('## Two instances behind Mosquitto', '');
    const rate = r.scale[0].readingsPerSecondPerBoard;
    lines.push(`Boards in one process, Mosquitto, two Runnel instances (separate processes, shared subscription, live events through PostgreSQL NOTIFY), one PostgreSQL — all on the same 2 cores. Valve latency is measured on a WebSocket client of the instance that did not send the command, from the board's time of the change. ${rate ? `Each board takes ${rate} readings a second and sends them five to a message, so the load grows with the boards` : 'Each board sends 5 readings a second'}.`, '');
    lines.push('The rate per board is one the whole line-up keeps up with at 5,000 boards on these 2 cores. Offered more than it can store, the backlog grows for as long as the run lasts (here in the boards\' simulator, which shares the cores) and a valve event waits behind it: at 5 readings a second per board (25,000 offered) 5,000 boards were stored at 11,500–14,100 readings/s, and valve events took 12–15 s (measured on 2026-12-03, not in this run). That figure is the length of the backlog, not the product\'s latency; the ceiling run above gives what one instance can store.', '');
    lines.push('| boards | offered readings/s | readings persisted/s | lost | valve event p99 (other instance) | peak RSS per instance |', '|---:|---:|---:|---:|---:|---:|');
    for (const s of r.scale) lines.push(`| ${s.controllers} | ${s.offeredReadingsPerSecond ?? '—'} | ${s.readingsPerSecond} | ${s.lost} | ${Number.isFinite(s.valveEventP99Ms) ? `${s.valveEventP99Ms} ms` : 'none arrived in the window'} | ${s.rssMbPerInstance.join(' / ')} MB |`);
    lines.push('', '![ingest and latency against boards](performance-scale.svg)', '');
    fs.writeFileSync(path.join(path.dirname(out), 'performance-scale.svg'), scalePlot(r.scale));
  }
  fs.writeFileSync(out, lines.join('\n'));
}

if (process.argv[1]?.endsWith('report.ts')) writePerformanceDoc();

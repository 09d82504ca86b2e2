import { monitorEventLoopDelay } from 'node:perf_hooks';
import { benchIngest } from './ingest';
const h = monitorEventLoopDelay({ resolution: 5 });
setTimeout(() => h.enable(), 12000);
const r = await benchIngest(Number(process.env.N ?? 1000), { windowMs: 15000 });
h.disable();
console.log(JSON.stringify(r));
console.log('loop delay ms p50', h.percentile(50) / 1e6, 'p99', h.percentile(99) / 1e6, 'max', h.max / 1e6);
const T = (globalThis as any).__T as number[][]; for (let i = 0; i < 3; i++) { const v = T.map((x) => x[i]).sort((a, b) => a - b); console.log(i, "p50", v[v.length >> 1], "p90", v[Math.floor(v.length * 0.9)], "p99", v[Math.floor(v.length * 0.99)]); }
process.exit(0);

// Compiles the server, the benchmark and the benchmark's simulator process into .build/node/
// (one ES module per entry, npm packages left as imports), so they run on plain node without
// tsx's loader thread and its per-function name wrappers.
import { build } from 'esbuild';

await build({
  entryPoints: { server: 'server/index.ts', 'bench-run': 'bench/run.ts', 'sim-child': 'bench/sim-child.ts' },
  outdir: '.build/node',
  bundle: true,
  splitting: true,
  format: 'esm',
  platform: 'node',
  target: 'node20',
  packages: 'external',
  sourcemap: 'linked',
  outExtension: { '.js': '.mjs' },
  logLevel: 'warning',
});

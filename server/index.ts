import { ConfigError, loadConfig } from './config';
import { startRuntime } from './runtime';

// listen and graceful shutdown only; everything else is built in runtime.ts / app.ts.
try {
  const config = loadConfig();
  const rt = await startRuntime(config);
  rt.log.info({ url: rt.url, mqtt: rt.mqttUrl }, 'Runnel is listening');
  if (config.RUNNEL_DEMO && config.SIMULATOR) {
    const { startDemoFleet } = await import('./demo');
    await startDemoFleet(rt);
  }
  let stopping = false;
  const stop = async (signal: string) => {
    if (stopping) return;
    stopping = true;
    rt.log.info({ signal }, 'shutting down');
    const force = setTimeout(() => process.exit(1), config.SHUTDOWN_GRACE_MS + 10_000);
    force.unref();
    await rt.close();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));
} catch (e) {
  if (e instanceof ConfigError) {
    console.error(e.message);
    process.exit(2);
  }
  throw e;
}

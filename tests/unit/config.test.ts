import { describe, expect, it } from 'vitest';
import { ConfigError, loadConfig } from '../../server/config';

describe('settings', () => {
  it('use defaults for everything but the database', () => {
    const c = loadConfig({ DATABASE_URL: 'postgres://u:p@127.0.0.1:5432/db' });
    expect(c.PORT).toBe(3000);
    expect(c.HOST).toBe('127.0.0.1');
    expect(c.MQTT_PORT).toBe(1883);
    expect(c.SIM_PORT).toBe(3901);
  });

  it('honour PORT', () => {
    expect(loadConfig({ DATABASE_URL: 'postgres://x/db', PORT: '4100' }).PORT).toBe(4100);
  });

  it('name every bad setting in one clear error', () => {
    expect(() => loadConfig({ DATABASE_URL: 'mysql://x', PORT: 'eighty' })).toThrow(ConfigError);
    try {
      loadConfig({ DATABASE_URL: 'mysql://x', PORT: 'eighty' });
    } catch (e) {
      expect((e as Error).message).toMatch(/DATABASE_URL/);
      expect((e as Error).message).toMatch(/PORT/);
    }
  });

  it('require a session secret and forbid demo mode in production', () => {
    expect(() => loadConfig({ DATABASE_URL: 'postgres://x/db', NODE_ENV: 'production' })).toThrow(/SESSION_SECRET/);
    expect(() =>
      loadConfig({ DATABASE_URL: 'postgres://x/db', NODE_ENV: 'production', SESSION_SECRET: 'x'.repeat(40), RUNNEL_DEMO: '1' }),
    ).toThrow(/demo/);
  });

  it('report a missing DATABASE_URL', () => {
    expect(() => loadConfig({})).toThrow(/DATABASE_URL/);
  });
});

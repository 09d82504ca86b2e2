import { loadConfig, type Config } from '../../server/config';

export function testConfig(databaseUrl: string, extra: Record<string, string> = {}): Config {
  return loadConfig({
    NODE_ENV: 'test',
    DATABASE_URL: databaseUrl,
    PORT: '0',
    LOG_LEVEL: 'silent',
    LOGIN_RATE_LIMIT: '1000',
    MQTT_PORT: '0',
    SIM_PORT: '0',
    WEATHER_PORT: '0',
    FAKE_SMTP_PORT: '0',
    // receipts come quickly in tests, so a test sees them within its own time
    RECEIPT_INTERVAL_MS: '300',
    ...extra,
  });
}

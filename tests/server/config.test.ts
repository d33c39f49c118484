// @vitest-environment node
import { describe, expect, it } from 'vitest';

import { ConfigError, loadConfig } from '../../server/config';

describe('loadConfig', () => {
  it('has working defaults for a local start', () => {
    const config = loadConfig({});
    expect(config).toMatchObject({
      port: 8080,
      host: '127.0.0.1',
      publicUrl: 'http://127.0.0.1:8080',
      pgPort: 54329,
      dataDir: '.data',
      registrationOpen: true,
      passwordMinLength: 10,
      resetTokenTtlMinutes: 60,
      devMail: true,
      trustProxy: false,
      defaultQuotaBytes: 5 * 1024 ** 3,
    });
    expect(config.databaseUrl).toBeUndefined();
  });
  it('reads booleans, numbers and strips a trailing slash from PUBLIC_URL', () => {
    const config = loadConfig({
      REGISTRATION_OPEN: 'false',
      PORT: '9000',
      PUBLIC_URL: 'https://sky.example.org/',
      TRUST_PROXY: 'yes',
      DATABASE_URL: 'postgresql://a:b@db/skysieve',
    });
    expect(config).toMatchObject({
      registrationOpen: false,
      port: 9000,
      publicUrl: 'https://sky.example.org',
      trustProxy: true,
      databaseUrl: 'postgresql://a:b@db/skysieve',
    });
  });
  it('turns the development mail receiver off in production, and then wants SMTP settings', () => {
    expect(() => loadConfig({ NODE_ENV: 'production' })).toThrow(
      'Invalid configuration: set SMTP_HOST (or DEV_MAIL=1) so the server can send e-mail.',
    );
    expect(loadConfig({ NODE_ENV: 'production', SMTP_HOST: 'smtp.example.org' }).devMail).toBe(false);
  });
  it('lists every invalid variable by name', () => {
    let error: unknown;
    try {
      loadConfig({ PORT: 'eighty', REGISTRATION_OPEN: 'maybe' });
    } catch (caught) {
      error = caught;
    }
    expect(error).toBeInstanceOf(ConfigError);
    expect((error as Error).message).toMatch(/^Invalid configuration in the environment:\n/);
    expect((error as Error).message).toContain('  PORT: ');
    expect((error as Error).message).toContain('  REGISTRATION_OPEN: ');
  });
  it('wants the admin e-mail and password together, and a password of the minimum length', () => {
    expect(() => loadConfig({ SKYSIEVE_ADMIN_EMAIL: 'a@example.org' })).toThrow(
      'Invalid configuration: set both SKYSIEVE_ADMIN_EMAIL and SKYSIEVE_ADMIN_PASSWORD, or neither.',
    );
    expect(() =>
      loadConfig({ SKYSIEVE_ADMIN_EMAIL: 'a@example.org', SKYSIEVE_ADMIN_PASSWORD: 'short' }),
    ).toThrow('Invalid configuration: SKYSIEVE_ADMIN_PASSWORD must be at least 10 characters long.');
  });
});

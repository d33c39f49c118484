/**
 * The server's configuration: read from the environment once, validated with zod.
 * Nothing else in the project reads `process.env`; every variable is documented in `.env.example`.
 */
import { z } from 'zod';

const booleanFromEnv = z
  .enum(['1', '0', 'true', 'false', 'yes', 'no', 'on', 'off', ''])
  .transform((value) => ['1', 'true', 'yes', 'on'].includes(value));

const optionalString = z
  .string()
  .optional()
  .transform((value) => (value === undefined || value === '' ? undefined : value));

const environmentSchema = z.object({
  NODE_ENV: z.enum(['development', 'production', 'test']).default('development'),
  PORT: z.coerce.number().int().min(0).max(65535).default(8080),
  HOST: z.string().min(1).default('127.0.0.1'),
  PUBLIC_URL: optionalString.pipe(z.url().optional()),
  DATABASE_URL: optionalString,
  PGPORT: z.coerce.number().int().min(1).max(65535).default(54329),
  DATA_DIR: optionalString,
  SESSION_SECRET: optionalString,
  REGISTRATION_OPEN: booleanFromEnv.default(true),
  DEFAULT_QUOTA_BYTES: z.coerce
    .number()
    .int()
    .nonnegative()
    .default(5 * 1024 ** 3),
  UPLOAD_MAX_BYTES: z.coerce
    .number()
    .int()
    .positive()
    .default(512 * 1024 ** 2),
  MAX_IMAGE_PIXELS: z.coerce
    .number()
    .int()
    .positive()
    .default(4096 * 4096),
  PASSWORD_MIN_LENGTH: z.coerce.number().int().min(8).max(200).default(10),
  BCRYPT_ROUNDS: z.coerce.number().int().min(4).max(15).default(12),
  RESET_TOKEN_TTL_MINUTES: z.coerce.number().int().positive().default(60),
  INVITATION_TTL_DAYS: z.coerce.number().int().positive().default(14),
  SIGN_IN_RATE_LIMIT: z.coerce.number().int().positive().default(10),
  RESET_RATE_LIMIT: z.coerce.number().int().positive().default(5),
  SIGN_UP_RATE_LIMIT: z.coerce.number().int().positive().default(20),
  RATE_LIMIT_WINDOW_MINUTES: z.coerce.number().int().positive().default(15),
  SESSION_MAX_AGE_DAYS: z.coerce.number().positive().default(14),
  SMTP_HOST: optionalString,
  SMTP_PORT: z.coerce.number().int().min(1).max(65535).default(587),
  SMTP_SECURE: booleanFromEnv.default(false),
  SMTP_USER: optionalString,
  SMTP_PASSWORD: optionalString,
  SMTP_FROM: z.string().min(3).default('Skysieve <no-reply@skysieve.invalid>'),
  DEV_MAIL: booleanFromEnv.optional(),
  DEV_MAIL_PORT: z.coerce.number().int().min(0).max(65535).default(0),
  TRUST_PROXY: booleanFromEnv.default(false),
  SKYSIEVE_ADMIN_EMAIL: optionalString,
  SKYSIEVE_ADMIN_PASSWORD: optionalString,
  WORKER_CONCURRENCY: z.coerce.number().int().positive().default(1),
  RUN_TIMEOUT_MINUTES: z.coerce.number().int().positive().default(60),
  LOG_REQUESTS: booleanFromEnv.default(false),
  SKIP_CLIENT_BUILD: booleanFromEnv.default(false),
});

export interface Config {
  nodeEnv: 'development' | 'production' | 'test';
  port: number;
  host: string;
  /** Base URL used in e-mailed links, without a trailing slash. */
  publicUrl: string;
  /** Unset means `npm start` runs its own PostgreSQL in `dataDir/pg`. */
  databaseUrl: string | undefined;
  pgPort: number;
  /** Folder for the local cluster and generated secrets (git-ignored `.data`). */
  dataDir: string;
  /** Unset: `npm start` generates one and keeps it in the data folder; server/index.ts refuses to run without. */
  sessionSecret: string | undefined;
  registrationOpen: boolean;
  defaultQuotaBytes: number;
  uploadMaxBytes: number;
  maxImagePixels: number;
  passwordMinLength: number;
  bcryptRounds: number;
  resetTokenTtlMinutes: number;
  invitationTtlDays: number;
  signInRateLimit: number;
  resetRateLimit: number;
  signUpRateLimit: number;
  rateLimitWindowMinutes: number;
  sessionMaxAgeDays: number;
  smtp: {
    host: string | undefined;
    port: number;
    secure: boolean;
    user: string | undefined;
    password: string | undefined;
    from: string;
  };
  /** Send e-mail to the in-process SMTP receiver (stored in `dev_mail`) instead of a real server. */
  devMail: boolean;
  /** Port of the in-process SMTP receiver on 127.0.0.1; 0 picks a free one. */
  devMailPort: number;
  trustProxy: boolean;
  adminEmail: string | undefined;
  adminPassword: string | undefined;
  workerConcurrency: number;
  runTimeoutMinutes: number;
  logRequests: boolean;
  /** `npm start` serves dist/ as it is, without rebuilding a stale client. */
  skipClientBuild: boolean;
}

export class ConfigError extends Error {}

/** Reads and validates the environment; throws a ConfigError listing every bad variable. */
export function loadConfig(env: NodeJS.ProcessEnv = process.env): Config {
  const parsed = environmentSchema.safeParse(env);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((issue) => `  ${issue.path.join('.')}: ${issue.message}`);
    throw new ConfigError(`Invalid configuration in the environment:\n${lines.join('\n')}`);
  }
  const e = parsed.data;
  const production = e.NODE_ENV === 'production';
  const devMail = e.DEV_MAIL ?? !production;
  if (production && !devMail && !e.SMTP_HOST) {
    throw new ConfigError(
      'Invalid configuration: set SMTP_HOST (or DEV_MAIL=1) so the server can send e-mail.',
    );
  }
  if ((e.SKYSIEVE_ADMIN_EMAIL === undefined) !== (e.SKYSIEVE_ADMIN_PASSWORD === undefined)) {
    throw new ConfigError(
      'Invalid configuration: set both SKYSIEVE_ADMIN_EMAIL and SKYSIEVE_ADMIN_PASSWORD, or neither.',
    );
  }
  if (e.SKYSIEVE_ADMIN_PASSWORD !== undefined && e.SKYSIEVE_ADMIN_PASSWORD.length < e.PASSWORD_MIN_LENGTH) {
    throw new ConfigError(
      `Invalid configuration: SKYSIEVE_ADMIN_PASSWORD must be at least ${e.PASSWORD_MIN_LENGTH} characters long.`,
    );
  }
  const publicUrl = (
    e.PUBLIC_URL ?? `http://${e.HOST === '0.0.0.0' ? '127.0.0.1' : e.HOST}:${e.PORT}`
  ).replace(/\/+$/, '');
  return {
    nodeEnv: e.NODE_ENV,
    port: e.PORT,
    host: e.HOST,
    publicUrl,
    databaseUrl: e.DATABASE_URL,
    pgPort: e.PGPORT,
    dataDir: e.DATA_DIR ?? '.data',
    sessionSecret: e.SESSION_SECRET,
    registrationOpen: e.REGISTRATION_OPEN,
    defaultQuotaBytes: e.DEFAULT_QUOTA_BYTES,
    uploadMaxBytes: e.UPLOAD_MAX_BYTES,
    maxImagePixels: e.MAX_IMAGE_PIXELS,
    passwordMinLength: e.PASSWORD_MIN_LENGTH,
    bcryptRounds: e.BCRYPT_ROUNDS,
    resetTokenTtlMinutes: e.RESET_TOKEN_TTL_MINUTES,
    invitationTtlDays: e.INVITATION_TTL_DAYS,
    signInRateLimit: e.SIGN_IN_RATE_LIMIT,
    resetRateLimit: e.RESET_RATE_LIMIT,
    signUpRateLimit: e.SIGN_UP_RATE_LIMIT,
    rateLimitWindowMinutes: e.RATE_LIMIT_WINDOW_MINUTES,
    sessionMaxAgeDays: e.SESSION_MAX_AGE_DAYS,
    smtp: {
      host: e.SMTP_HOST,
      port: e.SMTP_PORT,
      secure: e.SMTP_SECURE,
      user: e.SMTP_USER,
      password: e.SMTP_PASSWORD,
      from: e.SMTP_FROM,
    },
    devMail,
    devMailPort: e.DEV_MAIL_PORT,
    trustProxy: e.TRUST_PROXY,
    adminEmail: e.SKYSIEVE_ADMIN_EMAIL,
    adminPassword: e.SKYSIEVE_ADMIN_PASSWORD,
    workerConcurrency: e.WORKER_CONCURRENCY,
    runTimeoutMinutes: e.RUN_TIMEOUT_MINUTES,
    logRequests: e.LOG_REQUESTS,
    skipClientBuild: e.SKIP_CLIENT_BUILD,
  };
}

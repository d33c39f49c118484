/**
 * The demo of the invented scenario (the "Lyra Deep Field" of the fictional Aster Wide Survey) and the
 * first-admin bootstrap. Both are idempotent: running them again changes nothing.
 * Images and runs of the demo are added by a later issue.
 */
import type { Knex } from 'knex';

import type { ProjectRole } from '../../shared/projects';
import { recordAudit } from '../audit/audit.service';
import { hashPassword } from '../auth/secrets';
import type { Config } from '../config';
import { Membership } from '../models/membership';
import { Project } from '../models/project';
import { User } from '../models/user';

export interface DemoAccount {
  email: string;
  password: string;
  displayName: string;
  role: 'admin' | 'member';
  /** Role in the demo project, if a member. */
  projectRole: ProjectRole | null;
}

/** Demo sign-ins printed by `npm start` (for a local demo only; change or disable them for real use). */
export const demoAccounts: DemoAccount[] = [
  {
    email: 'admin@lyra-survey.example',
    password: 'lyra-admin-demo',
    displayName: 'Survey Administrator',
    role: 'admin',
    projectRole: null,
  },
  {
    email: 'astro@lyra-survey.example',
    password: 'lyra-astro-demo',
    displayName: 'Ada Stellwagen',
    role: 'member',
    projectRole: 'owner',
  },
  {
    email: 'colleague@lyra-survey.example',
    password: 'lyra-colleague-demo',
    displayName: 'Colm Leary',
    role: 'member',
    projectRole: 'viewer',
  },
];

export const demoProject = {
  name: 'Lyra Deep Field',
  description:
    'Aster Wide Survey (AWS), Lyra Deep Field: demo project of an invented survey, for trying Skysieve out.',
};

export interface SeedResult {
  createdUsers: number;
  createdProject: boolean;
  createdMemberships: number;
}

export async function seedDemo(knex: Knex, config: Config): Promise<SeedResult> {
  const result: SeedResult = { createdUsers: 0, createdProject: false, createdMemberships: 0 };
  await knex.transaction(async (trx) => {
    // One seeder at a time, even if two starts race.
    await trx.raw('select pg_advisory_xact_lock(424242)');
    const users = new Map<string, User>();
    for (const account of demoAccounts) {
      let user = await User.query(trx).modify('byEmail', account.email).first();
      if (!user) {
        user = await User.query(trx).insertAndFetch({
          email: account.email,
          displayName: account.displayName,
          passwordHash: await hashPassword(account.password, config.bcryptRounds),
          role: account.role,
          quotaBytes: config.defaultQuotaBytes,
          bytesUsed: 0,
        });
        result.createdUsers++;
      }
      users.set(account.email, user);
    }
    const owner = demoAccounts.find((account) => account.projectRole === 'owner');
    const ownerUser = owner ? users.get(owner.email) : undefined;
    let project = await Project.query(trx).where('name', demoProject.name).orderBy('id').first();
    if (!project) {
      project = await Project.query(trx).insertAndFetch({ ...demoProject, ownerId: ownerUser?.id ?? null });
      result.createdProject = true;
    }
    for (const account of demoAccounts) {
      const user = users.get(account.email);
      if (!account.projectRole || !user) continue;
      if (await Membership.query(trx).where({ projectId: project.id, userId: user.id }).first()) continue;
      await Membership.query(trx).insert({
        projectId: project.id,
        userId: user.id,
        role: account.projectRole,
      });
      result.createdMemberships++;
    }
  });
  return result;
}

export type AdminBootstrap = 'created' | 'promoted' | 'unchanged' | 'not configured';

/**
 * With SKYSIEVE_ADMIN_EMAIL and SKYSIEVE_ADMIN_PASSWORD set, ensures that account exists, is an
 * administrator and is enabled. An existing account keeps its password.
 */
export async function ensureAdmin(knex: Knex, config: Config): Promise<AdminBootstrap> {
  const { adminEmail, adminPassword } = config;
  if (!adminEmail || !adminPassword) return 'not configured';
  return knex.transaction(async (trx) => {
    await trx.raw('select pg_advisory_xact_lock(424243)');
    const user = await User.query(trx).modify('byEmail', adminEmail).first();
    if (!user) {
      const created = await User.query(trx).insertAndFetch({
        email: adminEmail,
        displayName: 'Administrator',
        passwordHash: await hashPassword(adminPassword, config.bcryptRounds),
        role: 'admin',
        quotaBytes: config.defaultQuotaBytes,
        bytesUsed: 0,
      });
      await recordAudit(
        { action: 'user.bootstrapped', targetType: 'user', targetId: created.id, details: { created: true } },
        trx,
      );
      return 'created';
    }
    if (user.role === 'admin' && !user.disabled) return 'unchanged';
    await User.query(trx).patch({ role: 'admin', disabled: false }).where('id', user.id);
    await recordAudit(
      { action: 'user.bootstrapped', targetType: 'user', targetId: user.id, details: { created: false } },
      trx,
    );
    return 'promoted';
  });
}

/** Small, valid API objects for client tests (shapes from shared/; the values are invented). */
import type { User } from '@shared/auth';
import type { AdminUser } from '@shared/admin';
import type { Member, ProjectDetail, ProjectSummary } from '@shared/projects';

const createdAt = '2026-03-01T10:00:00.000Z';

export function makeUser(overrides: Partial<User> = {}): User {
  return {
    id: 1,
    email: 'vega@aws.example',
    displayName: 'Vega Lindqvist',
    role: 'member',
    quotaBytes: 1024 ** 3,
    bytesUsed: 0,
    disabled: false,
    emailOnRunFinish: false,
    createdAt,
    ...overrides,
  };
}

export function makeAdminUser(overrides: Partial<AdminUser> = {}): AdminUser {
  return { ...makeUser(), projectCount: 0, lastSignInAt: null, ...overrides };
}

export function makeProject(overrides: Partial<ProjectSummary> = {}): ProjectSummary {
  return {
    id: 7,
    name: 'Lyra Deep Field',
    description: 'Aster Wide Survey tile 12',
    ownerId: 1,
    myRole: 'owner',
    memberCount: 1,
    createdAt,
    updatedAt: createdAt,
    ...overrides,
  };
}

export function makeMember(overrides: Partial<Member> = {}): Member {
  return { userId: 1, email: 'vega@aws.example', displayName: 'Vega Lindqvist', role: 'owner', ...overrides };
}

export function makeProjectDetail(overrides: Partial<ProjectDetail> = {}): ProjectDetail {
  return { ...makeProject(), members: [makeMember()], ...overrides };
}

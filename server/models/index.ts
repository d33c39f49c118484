export { ApiToken } from './api-token';
export { AuditEvent } from './audit-event';
export { DevMail } from './dev-mail';
export { Invitation } from './invitation';
export { Membership } from './membership';
export { PasswordReset } from './password-reset';
export { Project } from './project';
export { User } from './user';

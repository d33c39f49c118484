/** The admin area: accounts with roles, quota and usage; storage per account and project; the audit log; the development mail inbox. */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import type {
  AdminUpdateUserRequest,
  AdminUser,
  AuditAction,
  AuditPage,
  DevMailMessage,
  DevMailSummary,
} from '@shared/admin';
import type { StorageUsage } from '@shared/images';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

export interface AuditFilters {
  action?: AuditAction;
  actorId?: number;
  page: number;
  pageSize: number;
}

export const useAdminStore = defineStore('admin', () => {
  const users = ref<AdminUser[]>([]);
  const usersLoading = ref(false);
  const usersError = ref<string | null>(null);

  const audit = ref<AuditPage | null>(null);
  const auditLoading = ref(false);
  const auditError = ref<string | null>(null);

  const mail = ref<DevMailSummary[]>([]);
  const mailLoading = ref(false);
  const mailError = ref<string | null>(null);
  const message = ref<DevMailMessage | null>(null);
  const messageLoading = ref(false);

  const storage = ref<StorageUsage | null>(null);
  const storageLoading = ref(false);
  const storageError = ref<string | null>(null);

  async function fetchUsers(): Promise<void> {
    usersLoading.value = true;
    usersError.value = null;
    try {
      users.value = await api.admin.users();
    } catch (error) {
      usersError.value = messageOf(error);
      notifyError(error);
    } finally {
      usersLoading.value = false;
    }
  }

  /** Optimistic: the change shows at once and is rolled back if the server refuses (e.g. self-demotion). */
  async function updateUser(userId: number, body: AdminUpdateUserRequest): Promise<boolean> {
    const before = users.value;
    users.value = before.map((user) => (user.id === userId ? { ...user, ...body } : user));
    try {
      const saved = await api.admin.updateUser(userId, body);
      users.value = users.value.map((user) => (user.id === userId ? saved : user));
      return true;
    } catch (error) {
      users.value = before;
      notifyError(error);
      return false;
    }
  }

  async function fetchAudit(filters: AuditFilters): Promise<void> {
    auditLoading.value = true;
    auditError.value = null;
    try {
      audit.value = await api.admin.audit(filters);
    } catch (error) {
      auditError.value = messageOf(error);
      notifyError(error);
    } finally {
      auditLoading.value = false;
    }
  }

  async function fetchMail(): Promise<void> {
    mailLoading.value = true;
    mailError.value = null;
    try {
      mail.value = await api.admin.mail();
    } catch (error) {
      mailError.value = messageOf(error);
      notifyError(error);
    } finally {
      mailLoading.value = false;
    }
  }

  async function fetchStorage(): Promise<void> {
    storageLoading.value = true;
    storageError.value = null;
    try {
      storage.value = await api.admin.storage();
    } catch (error) {
      storageError.value = messageOf(error);
      notifyError(error);
    } finally {
      storageLoading.value = false;
    }
  }

  async function openMessage(mailId: number): Promise<void> {
    messageLoading.value = true;
    try {
      message.value = await api.admin.mailMessage(mailId);
    } catch (error) {
      message.value = null;
      notifyError(error);
    } finally {
      messageLoading.value = false;
    }
  }

  return {
    users,
    usersLoading,
    usersError,
    audit,
    auditLoading,
    auditError,
    mail,
    mailLoading,
    mailError,
    message,
    messageLoading,
    storage,
    storageLoading,
    storageError,
    fetchUsers,
    updateUser,
    fetchAudit,
    fetchMail,
    openMessage,
    fetchStorage,
  };
});

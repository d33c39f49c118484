/** The signed-in user, the server's public settings, and everything about signing in and out. */
import { defineStore } from 'pinia';
import { computed, ref } from 'vue';

import type {
  InvitationPreview,
  LoginRequest,
  PasswordChangeRequest,
  SignupRequest,
  UpdateMeRequest,
  User,
} from '@shared/auth';
import type { PublicConfig } from '@shared/health';
import { api, ApiError } from '@/boot/api';
import { dismissErrors, notifyError, succeeded } from '@/boot/notify';

export const useAuthStore = defineStore('auth', () => {
  const user = ref<User | null>(null);
  /** True once the server has been asked who is signed in (the router guard waits for it). */
  const checked = ref(false);
  const config = ref<PublicConfig | null>(null);

  const signedIn = computed(() => user.value !== null);
  const isAdmin = computed(() => user.value?.role === 'admin');

  /**
   * Ask the server who is signed in. The session probe answers 200 with `user: null` when nobody is, so a
   * signed-out start logs no failed request in the browser; a 401 (a rejected API token) also means nobody.
   */
  async function fetchMe(): Promise<User | null> {
    try {
      user.value = (await api.auth.session()).user;
    } catch (error) {
      user.value = null;
      if (!(error instanceof ApiError && error.status === 401)) notifyError(error);
    } finally {
      checked.value = true;
    }
    return user.value;
  }

  async function ensureChecked(): Promise<void> {
    if (!checked.value) await fetchMe();
  }

  async function loadConfig(): Promise<PublicConfig | null> {
    if (config.value) return config.value;
    try {
      config.value = await api.config.public();
    } catch (error) {
      notifyError(error);
    }
    return config.value;
  }

  async function login(body: LoginRequest): Promise<boolean> {
    try {
      user.value = (await api.auth.login(body)).user;
      api.resetCsrf();
      dismissErrors();
      return true;
    } catch (error) {
      notifyError(error);
      return false;
    }
  }

  async function signup(body: SignupRequest): Promise<boolean> {
    try {
      user.value = (await api.auth.signup(body)).user;
      api.resetCsrf();
      dismissErrors();
      return true;
    } catch (error) {
      notifyError(error);
      return false;
    }
  }

  async function logout(): Promise<boolean> {
    try {
      await api.auth.logout();
    } catch (error) {
      // A session that had already ended is signed out as far as the user is concerned.
      if (!(error instanceof ApiError && error.status === 401)) {
        notifyError(error);
        return false;
      }
    }
    user.value = null;
    api.resetCsrf();
    return true;
  }

  /** Optimistic: the new settings show at once and return to the old ones if the server refuses. */
  async function updateMe(body: UpdateMeRequest): Promise<boolean> {
    const before = user.value;
    if (before) user.value = { ...before, ...body };
    try {
      user.value = (await api.auth.updateMe(body)).user;
      return true;
    } catch (error) {
      user.value = before;
      notifyError(error);
      return false;
    }
  }

  async function changePassword(body: PasswordChangeRequest): Promise<boolean> {
    return succeeded(api.auth.changePassword(body));
  }

  async function requestReset(email: string): Promise<boolean> {
    return succeeded(api.auth.requestReset(email));
  }

  async function confirmReset(token: string, password: string): Promise<boolean> {
    return succeeded(api.auth.confirmReset({ token, password }));
  }

  /** What an invitation link offers, for the sign-up page; null (with a notice) when it is unknown or expired. */
  async function previewInvitation(token: string): Promise<InvitationPreview | null> {
    try {
      return await api.auth.invitation(token);
    } catch (error) {
      notifyError(error);
      return null;
    }
  }

  /** The session ended on the server (expired, account disabled): forget the user locally. */
  function forget(): void {
    user.value = null;
    api.resetCsrf();
  }

  return {
    user,
    checked,
    config,
    signedIn,
    isAdmin,
    fetchMe,
    ensureChecked,
    loadConfig,
    login,
    signup,
    logout,
    updateMe,
    changePassword,
    requestReset,
    confirmReset,
    previewInvitation,
    forget,
  };
});

/** Personal API tokens: listed, created (the secret is shown once), revoked. */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import type { ApiToken, CreatedToken } from '@shared/tokens';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

export const useTokensStore = defineStore('tokens', () => {
  const tokens = ref<ApiToken[]>([]);
  const loading = ref(false);
  const loadError = ref<string | null>(null);
  /** The token just created, with its secret; cleared when the user dismisses it. Never stored anywhere else. */
  const justCreated = ref<CreatedToken | null>(null);

  async function fetchTokens(): Promise<void> {
    loading.value = true;
    loadError.value = null;
    try {
      tokens.value = await api.tokens.list();
    } catch (error) {
      loadError.value = messageOf(error);
      notifyError(error);
    } finally {
      loading.value = false;
    }
  }

  async function createToken(name: string): Promise<CreatedToken | null> {
    try {
      const created = await api.tokens.create({ name });
      const { token: _secret, ...listed } = created;
      tokens.value = [listed, ...tokens.value];
      justCreated.value = created;
      return created;
    } catch (error) {
      notifyError(error);
      return null;
    }
  }

  /** Optimistic: the token leaves the list at once and comes back if the server refuses. */
  async function revokeToken(tokenId: number): Promise<boolean> {
    const before = tokens.value;
    tokens.value = before.filter((token) => token.id !== tokenId);
    if (justCreated.value?.id === tokenId) justCreated.value = null;
    try {
      await api.tokens.revoke(tokenId);
      return true;
    } catch (error) {
      tokens.value = before;
      notifyError(error);
      return false;
    }
  }

  function dismissCreated(): void {
    justCreated.value = null;
  }

  return { tokens, loading, loadError, justCreated, fetchTokens, createToken, revokeToken, dismissCreated };
});

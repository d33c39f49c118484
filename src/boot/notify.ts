/**
 * The one place that tells the user what happened: failures show the server's own message
 * (ApiError.message), successes a short confirmation.
 */
import { Notify } from 'quasar';

import { ApiError } from './api';

/** Text to show for any thrown value. */
export function messageOf(error: unknown): string {
  if (error instanceof ApiError) {
    const issues = error.fieldIssues;
    if (issues.length > 0 && error.code === 'validation_failed') {
      return `${error.message} ${issues.map((issue) => issue.message).join(' ')}`.trim();
    }
    return error.message;
  }
  if (error instanceof Error && error.message) return error.message;
  return 'Something went wrong. Please try again.';
}

/** Dismissers of the error notifications still on screen. */
const openErrors = new Set<() => void>();

export function notifyError(error: unknown): void {
  let dismiss: () => void = () => undefined;
  dismiss = Notify.create({
    type: 'negative',
    message: messageOf(error),
    position: 'top',
    timeout: 6000,
    actions: [{ icon: 'close', color: 'white', round: true, 'aria-label': 'Dismiss' }],
    onDismiss: () => openErrors.delete(dismiss),
  });
  openErrors.add(dismiss);
}

/** Clears earlier failures once they no longer apply (e.g. a refused sign-in after a successful one). */
export function dismissErrors(): void {
  for (const dismiss of [...openErrors]) dismiss();
  openErrors.clear();
}

export function notifySuccess(message: string): void {
  Notify.create({ type: 'positive', message, position: 'top', timeout: 2500 });
}

/** Awaits an action for a store: true when it worked, false after showing its failure. */
export async function succeeded(action: Promise<unknown>): Promise<boolean> {
  try {
    await action;
    return true;
  } catch (error) {
    notifyError(error);
    return false;
  }
}

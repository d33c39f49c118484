/** A redirect target taken from the URL: only paths inside the app, never another site. */
export function safeRedirect(value: unknown): string | null {
  if (typeof value !== 'string') return null;
  return value.startsWith('/') && !value.startsWith('//') && !value.startsWith('/\\') ? value : null;
}

/** The e-mails Skysieve sends: plain text first, with a simple HTML twin. */
import type { OutgoingMail } from './mailer';

const escapeHtml = (text: string): string =>
  text.replace(
    /[&<>"']/g,
    (char) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[char]!,
  );

function compose(
  to: string,
  subject: string,
  paragraphs: string[],
  link?: { url: string; label: string },
): OutgoingMail {
  const text = [...paragraphs, ...(link ? [`${link.label}: ${link.url}`] : []), '— Skysieve'].join('\n\n');
  const html = [
    ...paragraphs.map((paragraph) => `<p>${escapeHtml(paragraph)}</p>`),
    ...(link ? [`<p><a href="${escapeHtml(link.url)}">${escapeHtml(link.label)}</a></p>`] : []),
    '<p>— Skysieve</p>',
  ].join('\n');
  return { to, subject, text, html };
}

export function passwordResetMail(to: string, url: string, ttlMinutes: number): OutgoingMail {
  return compose(
    to,
    'Reset your Skysieve password',
    [
      'Someone (hopefully you) asked to reset the password of your Skysieve account.',
      `The link below works once and expires in ${ttlMinutes} minutes. If you did not ask for it, ignore this e-mail: your password stays as it is.`,
    ],
    { url, label: 'Choose a new password' },
  );
}

export function invitationMail(
  to: string,
  projectName: string,
  inviter: string,
  role: string,
  url: string,
  days: number,
) {
  return compose(
    to,
    `${inviter} invited you to the Skysieve project "${projectName}"`,
    [
      `${inviter} invited you to join the project "${projectName}" on Skysieve as ${role}.`,
      `Create your account with this address through the link below (valid for ${days} days) and the project appears in your list.`,
    ],
    { url, label: 'Create your account' },
  );
}

export function addedToProjectMail(
  to: string,
  projectName: string,
  inviter: string,
  role: string,
  url: string,
) {
  return compose(
    to,
    `You were added to the Skysieve project "${projectName}"`,
    [`${inviter} added you to the project "${projectName}" on Skysieve as ${role}.`],
    { url, label: 'Open the project' },
  );
}

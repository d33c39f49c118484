/** The e-mail a run's creator gets when it finishes or fails (only with users.email_on_run_finish set). */
import type { Knex } from 'knex';

import type { AppContext } from '../context';
import type { OutgoingMail } from '../mail/mailer';

const escapeHtml = (text: string): string =>
  text.replace(
    /[&<>"']/g,
    (char) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[char]!,
  );

export function runFinishedMail(
  to: string,
  run: {
    id: number;
    status: 'succeeded' | 'failed';
    imageName: string;
    sourceCount: number | null;
    errorMessage: string | null;
  },
  url: string,
): OutgoingMail {
  const subject =
    run.status === 'succeeded'
      ? `Run ${run.id} on ${run.imageName} finished`
      : `Run ${run.id} on ${run.imageName} failed`;
  const paragraphs =
    run.status === 'succeeded'
      ? [
          `Your separation run ${run.id} on the image "${run.imageName}" finished with ${run.sourceCount ?? 0} catalogue sources.`,
          'The catalogue is model-dependent: check the residuals before you rely on it.',
        ]
      : [
          `Your separation run ${run.id} on the image "${run.imageName}" failed.`,
          `Reason: ${run.errorMessage ?? 'unknown'}`,
        ];
  const text = [...paragraphs, `Open the run: ${url}`, '— Skysieve'].join('\n\n');
  const html = [
    ...paragraphs.map((p) => `<p>${escapeHtml(p)}</p>`),
    `<p><a href="${escapeHtml(url)}">Open the run</a></p>`,
    '<p>— Skysieve</p>',
  ].join('\n');
  return { to, subject, text, html };
}

/** Sends the finish/failure e-mail of run `runId` when its creator asked for one. Never throws. */
export async function notifyRunFinished(
  ctx: Pick<AppContext, 'config' | 'mailer' | 'logger'>,
  knex: Knex,
  runId: number,
) {
  try {
    const row = (await knex('runs')
      .join('users', 'users.id', 'runs.created_by')
      .join('images', 'images.id', 'runs.image_id')
      .where('runs.id', runId)
      .first(
        'runs.status',
        'runs.source_count as sourceCount',
        'runs.error_message as errorMessage',
        'users.email',
        'users.email_on_run_finish as emailOnRunFinish',
        'users.disabled',
        'images.name as imageName',
      )) as
      | {
          status: string;
          sourceCount: number | null;
          errorMessage: string | null;
          email: string;
          emailOnRunFinish: boolean;
          disabled: boolean;
          imageName: string;
        }
      | undefined;
    if (!row || !row.emailOnRunFinish || row.disabled) return;
    if (row.status !== 'succeeded' && row.status !== 'failed') return;
    ctx.mailer.send(
      runFinishedMail(
        row.email,
        {
          id: runId,
          status: row.status,
          imageName: row.imageName,
          sourceCount: row.sourceCount,
          errorMessage: row.errorMessage,
        },
        `${ctx.config.publicUrl}/runs/${runId}`,
      ),
    );
  } catch (error) {
    ctx.logger.error(error);
  }
}

import type { Response } from 'express';

import type { Download } from '../catalogue/downloads';

/** Sends a file download: its media type, an attachment Content-Disposition with its name, and its bytes. */
export function sendDownload(res: Response, download: Download): void {
  res.setHeader('Content-Type', download.contentType);
  res.setHeader('Content-Disposition', `attachment; filename="${download.fileName}"`);
  res.send(download.body);
}

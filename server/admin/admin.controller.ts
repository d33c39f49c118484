import type { Response } from 'express';

import type { AdminUpdateUserRequest, AuditQuery } from '../../shared/admin';
import { listAudit } from '../audit/audit.service';
import { clientIp } from '../auth/authentication';
import type { ApiRequest } from '../http/api-route';
import { currentUser } from '../http/guards';
import * as admin from './admin.service';

type IdParams = { id: number };

export const adminController = {
  async users(_req: ApiRequest, res: Response) {
    res.json(await admin.listUsers());
  },
  async updateUser(req: ApiRequest<AdminUpdateUserRequest, IdParams>, res: Response) {
    res.json(await admin.updateUser(currentUser(req), req.params.id, req.body, clientIp(req)));
  },
  async audit(req: ApiRequest<unknown, IdParams, AuditQuery>, res: Response) {
    res.json(await listAudit(req.query));
  },
  async mailList(_req: ApiRequest, res: Response) {
    res.json(await admin.listMail());
  },
  async mail(req: ApiRequest<unknown, IdParams>, res: Response) {
    res.json(await admin.getMail(req.params.id));
  },
};

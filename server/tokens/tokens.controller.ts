import type { Response } from 'express';

import type { CreateTokenRequest } from '../../shared/tokens';
import { clientIp } from '../auth/authentication';
import type { ApiRequest } from '../http/api-route';
import { currentUser } from '../http/guards';
import * as tokens from './tokens.service';

export const tokensController = {
  async list(req: ApiRequest, res: Response) {
    res.json((await tokens.listTokens(currentUser(req))).map((token) => token.toDto()));
  },
  async create(req: ApiRequest<CreateTokenRequest>, res: Response) {
    res.status(201).json(await tokens.createToken(currentUser(req), req.body.name, clientIp(req)));
  },
  async revoke(req: ApiRequest<unknown, { id: number }>, res: Response) {
    await tokens.revokeToken(currentUser(req), req.params.id, clientIp(req));
    res.status(204).end();
  },
};

import type { Response } from 'express';

import type {
  AddMemberRequest,
  CreateProjectRequest,
  DeleteProjectRequest,
  UpdateMemberRequest,
  UpdateProjectRequest,
} from '../../shared/projects';
import { clientIp } from '../auth/authentication';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { currentUser } from '../http/guards';
import { projectAccessOf } from './project-access';
import * as projects from './projects.service';

type IdParams = { id: number };
type MemberParams = { id: number; userId: number };
type InvitationParams = { id: number; invitationId: number };

export function projectsController(ctx: AppContext) {
  return {
    async list(req: ApiRequest<unknown, IdParams, { all?: 'true' | 'false' }>, res: Response) {
      res.json(await projects.listProjects(currentUser(req), req.query.all === 'true'));
    },
    async create(req: ApiRequest<CreateProjectRequest>, res: Response) {
      res.status(201).json(await projects.createProject(currentUser(req), req.body, clientIp(req)));
    },
    async show(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await projects.projectDetail(currentUser(req), req.params.id));
    },
    async update(req: ApiRequest<UpdateProjectRequest, IdParams>, res: Response) {
      res.json(await projects.updateProject(currentUser(req), projectAccessOf(req), req.body, clientIp(req)));
    },
    async remove(req: ApiRequest<DeleteProjectRequest, IdParams>, res: Response) {
      await projects.deleteProject(
        currentUser(req),
        projectAccessOf(req),
        req.body.confirmName,
        clientIp(req),
      );
      res.status(204).end();
    },
    async members(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await projects.listMembers(req.params.id));
    },
    async addMember(req: ApiRequest<AddMemberRequest, IdParams>, res: Response) {
      const { email, role } = req.body;
      const result = await projects.addMember(
        ctx,
        currentUser(req),
        projectAccessOf(req),
        email,
        role,
        clientIp(req),
      );
      if (result.kind === 'member') res.status(201).json({ member: result.member });
      else res.status(202).json({ invitation: result.invitation });
    },
    async changeRole(req: ApiRequest<UpdateMemberRequest, MemberParams>, res: Response) {
      const { id, userId } = req.params;
      res.json(await projects.changeMemberRole(currentUser(req), id, userId, req.body.role, clientIp(req)));
    },
    async removeMember(req: ApiRequest<unknown, MemberParams>, res: Response) {
      await projects.removeMember(currentUser(req), req.params.id, req.params.userId, clientIp(req));
      res.status(204).end();
    },
    async leave(req: ApiRequest<unknown, IdParams>, res: Response) {
      const user = currentUser(req);
      await projects.removeMember(user, req.params.id, user.id, clientIp(req), 'member.left');
      res.status(204).end();
    },
    async invitations(req: ApiRequest<unknown, IdParams>, res: Response) {
      res.json(await projects.listInvitations(req.params.id));
    },
    async revokeInvitation(req: ApiRequest<unknown, InvitationParams>, res: Response) {
      await projects.revokeInvitation(
        currentUser(req),
        req.params.id,
        req.params.invitationId,
        clientIp(req),
      );
      res.status(204).end();
    },
  };
}

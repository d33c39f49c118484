/** Projects the user can see, the open project with its members and invitations. */
import { defineStore } from 'pinia';
import { ref } from 'vue';

import type {
  Invitation,
  InviteRole,
  ProjectDetail,
  ProjectRole,
  ProjectSummary,
  UpdateProjectRequest,
} from '@shared/projects';
import { api } from '@/boot/api';
import { messageOf, notifyError } from '@/boot/notify';

export type AddMemberOutcome =
  { kind: 'member'; email: string } | { kind: 'invitation'; email: string } | null;

export const useProjectsStore = defineStore('projects', () => {
  const projects = ref<ProjectSummary[]>([]);
  const listLoading = ref(false);
  const listError = ref<string | null>(null);
  const listLoaded = ref(false);

  const current = ref<ProjectDetail | null>(null);
  const currentLoading = ref(false);
  const currentError = ref<string | null>(null);
  const invitations = ref<Invitation[]>([]);

  async function fetchProjects(all = false): Promise<void> {
    listLoading.value = true;
    listError.value = null;
    try {
      projects.value = await api.projects.list(all);
      listLoaded.value = true;
    } catch (error) {
      listError.value = messageOf(error);
      notifyError(error);
    } finally {
      listLoading.value = false;
    }
  }

  async function createProject(name: string, description: string): Promise<ProjectSummary | null> {
    try {
      const created = await api.projects.create({ name, description: description || undefined });
      projects.value = [created, ...projects.value.filter((project) => project.id !== created.id)];
      return created;
    } catch (error) {
      notifyError(error);
      return null;
    }
  }

  /** Loads the project and, for those who manage it (its owners, admins), its open invitations. */
  async function fetchProject(projectId: number, isAdmin = false): Promise<void> {
    currentLoading.value = true;
    currentError.value = null;
    if (current.value?.id !== projectId) {
      current.value = null;
      invitations.value = [];
    }
    try {
      const project = await api.projects.get(projectId);
      current.value = project;
      invitations.value =
        isAdmin || project.myRole === 'owner' ? await api.projects.invitations(projectId) : [];
    } catch (error) {
      currentError.value = messageOf(error);
      notifyError(error);
    } finally {
      currentLoading.value = false;
    }
  }

  function patchSummary(projectId: number, patch: Partial<ProjectSummary>): void {
    projects.value = projects.value.map((project) =>
      project.id === projectId ? { ...project, ...patch } : project,
    );
    if (current.value?.id === projectId) current.value = { ...current.value, ...patch };
  }

  /** Optimistic rename / new description, rolled back if the server refuses. */
  async function updateProject(projectId: number, body: UpdateProjectRequest): Promise<boolean> {
    const beforeList = projects.value;
    const beforeCurrent = current.value;
    patchSummary(projectId, body);
    try {
      const saved = await api.projects.update(projectId, body);
      patchSummary(projectId, saved);
      return true;
    } catch (error) {
      projects.value = beforeList;
      current.value = beforeCurrent;
      notifyError(error);
      return false;
    }
  }

  function dropProject(projectId: number): void {
    projects.value = projects.value.filter((project) => project.id !== projectId);
    if (current.value?.id === projectId) current.value = null;
  }

  async function deleteProject(projectId: number, confirmName: string): Promise<boolean> {
    const beforeList = projects.value;
    const beforeCurrent = current.value;
    dropProject(projectId);
    try {
      await api.projects.remove(projectId, confirmName);
      return true;
    } catch (error) {
      projects.value = beforeList;
      current.value = beforeCurrent;
      notifyError(error);
      return false;
    }
  }

  async function leaveProject(projectId: number): Promise<boolean> {
    try {
      await api.projects.leave(projectId);
      dropProject(projectId);
      return true;
    } catch (error) {
      notifyError(error);
      return false;
    }
  }

  async function addMember(projectId: number, email: string, role: InviteRole): Promise<AddMemberOutcome> {
    try {
      const answer = await api.projects.addMember(projectId, { email, role });
      if ('member' in answer) {
        if (current.value?.id === projectId) {
          current.value = {
            ...current.value,
            members: [...current.value.members, answer.member],
            memberCount: current.value.memberCount + 1,
          };
        }
        return { kind: 'member', email: answer.member.email };
      }
      invitations.value = [answer.invitation, ...invitations.value];
      return { kind: 'invitation', email: answer.invitation.email };
    } catch (error) {
      notifyError(error);
      return null;
    }
  }

  /** Optimistic role change, rolled back if the server refuses (e.g. the last owner). */
  async function changeRole(projectId: number, userId: number, role: ProjectRole): Promise<boolean> {
    const before = current.value;
    if (before?.id === projectId) {
      current.value = {
        ...before,
        members: before.members.map((member) => (member.userId === userId ? { ...member, role } : member)),
      };
    }
    try {
      const saved = await api.projects.updateMember(projectId, userId, role);
      if (current.value?.id === projectId) {
        current.value = {
          ...current.value,
          members: current.value.members.map((member) => (member.userId === userId ? saved : member)),
        };
      }
      return true;
    } catch (error) {
      current.value = before;
      notifyError(error);
      return false;
    }
  }

  async function removeMember(projectId: number, userId: number): Promise<boolean> {
    const before = current.value;
    if (before?.id === projectId) {
      current.value = {
        ...before,
        members: before.members.filter((member) => member.userId !== userId),
        memberCount: Math.max(0, before.memberCount - 1),
      };
    }
    try {
      await api.projects.removeMember(projectId, userId);
      return true;
    } catch (error) {
      current.value = before;
      notifyError(error);
      return false;
    }
  }

  async function revokeInvitation(projectId: number, invitationId: number): Promise<boolean> {
    const before = invitations.value;
    invitations.value = before.filter((invitation) => invitation.id !== invitationId);
    try {
      await api.projects.revokeInvitation(projectId, invitationId);
      return true;
    } catch (error) {
      invitations.value = before;
      notifyError(error);
      return false;
    }
  }

  return {
    projects,
    listLoading,
    listError,
    listLoaded,
    current,
    currentLoading,
    currentError,
    invitations,
    fetchProjects,
    createProject,
    fetchProject,
    updateProject,
    deleteProject,
    leaveProject,
    addMember,
    changeRole,
    removeMember,
    revokeInvitation,
  };
});

import type { RouteRecordRaw } from 'vue-router';

const routes: RouteRecordRaw[] = [
  {
    path: '/',
    component: () => import('@/layouts/AuthLayout.vue'),
    children: [
      {
        path: 'signin',
        name: 'sign-in',
        component: () => import('@/pages/SignInPage.vue'),
        meta: { guestOnly: true, title: 'Sign in' },
      },
      {
        path: 'signup',
        name: 'sign-up',
        component: () => import('@/pages/SignUpPage.vue'),
        meta: { guestOnly: true, title: 'Create an account' },
      },
      {
        path: 'reset',
        name: 'reset-request',
        component: () => import('@/pages/ResetRequestPage.vue'),
        meta: { title: 'Reset your password' },
      },
      {
        path: 'reset/:token',
        name: 'reset-confirm',
        component: () => import('@/pages/ResetConfirmPage.vue'),
        meta: { title: 'Choose a new password' },
      },
    ],
  },
  {
    path: '/',
    component: () => import('@/layouts/MainLayout.vue'),
    meta: { requiresAuth: true },
    children: [
      { path: '', redirect: { name: 'projects' } },
      {
        path: 'projects',
        name: 'projects',
        component: () => import('@/pages/ProjectListPage.vue'),
        meta: { title: 'Projects' },
      },
      {
        path: 'projects/:id(\\d+)',
        name: 'project',
        component: () => import('@/pages/ProjectPage.vue'),
        meta: { title: 'Project' },
      },
      {
        path: 'projects/:id(\\d+)/images',
        name: 'project-images',
        component: () => import('@/pages/ImageLibraryPage.vue'),
        meta: { title: 'Images' },
      },
      {
        path: 'projects/:id(\\d+)/joint-runs/new',
        name: 'joint-run-setup',
        component: () => import('@/pages/JointRunSetupPage.vue'),
        meta: { title: 'New joint run' },
      },
      {
        path: 'images/:id(\\d+)/runs/new',
        name: 'run-setup',
        component: () => import('@/pages/RunSetupPage.vue'),
        meta: { title: 'New run' },
      },
      {
        path: 'runs/:id(\\d+)',
        name: 'run',
        component: () => import('@/pages/RunPage.vue'),
        meta: { title: 'Run' },
      },
      {
        path: 'runs/:id(\\d+)/cross-match',
        name: 'run-cross-match',
        component: () => import('@/pages/CrossMatchPage.vue'),
        meta: { title: 'Cross-match' },
      },
      {
        path: 'runs/:id(\\d+)/completeness',
        name: 'run-completeness',
        component: () => import('@/pages/RunCompletenessPage.vue'),
        meta: { title: 'Completeness' },
      },
      {
        path: 'comparisons/:id(\\d+)',
        name: 'comparison',
        component: () => import('@/pages/ComparisonPage.vue'),
        meta: { title: 'Comparison' },
      },
      {
        path: 'account',
        name: 'account',
        component: () => import('@/pages/AccountPage.vue'),
        meta: { title: 'Account' },
      },
      { path: 'admin', redirect: { name: 'admin-users' } },
      {
        path: 'admin/users',
        name: 'admin-users',
        component: () => import('@/pages/AdminUsersPage.vue'),
        meta: { requiresAdmin: true, title: 'Users' },
      },
      {
        path: 'admin/audit',
        name: 'admin-audit',
        component: () => import('@/pages/AdminAuditPage.vue'),
        meta: { requiresAdmin: true, title: 'Audit log' },
      },
      {
        path: 'admin/storage',
        name: 'admin-storage',
        component: () => import('@/pages/AdminStoragePage.vue'),
        meta: { requiresAdmin: true, title: 'Storage' },
      },
      {
        path: 'admin/mail/:mailId(\\d+)?',
        name: 'admin-mail',
        component: () => import('@/pages/AdminMailPage.vue'),
        meta: { requiresAdmin: true, title: 'Mail inbox' },
      },
    ],
  },
  {
    path: '/:pathMatch(.*)*',
    component: () => import('@/layouts/AuthLayout.vue'),
    children: [
      {
        path: '',
        name: 'not-found',
        component: () => import('@/pages/NotFoundPage.vue'),
        meta: { title: 'Not found' },
      },
    ],
  },
];

export default routes;

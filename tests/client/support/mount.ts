/**
 * Mounts a component the way the app runs it: Quasar (with Notify and Dialog), a testing Pinia whose
 * actions really run (so they reach the API mock), and a memory-history router with the app's routes.
 * Pages are wrapped in QLayout + QPageContainer, since a QPage must sit inside a layout.
 */
import { h, type Component } from 'vue';
import { flushPromises, mount } from '@vue/test-utils';
import { createTestingPinia } from '@pinia/testing';
import { Dialog, Notify, QLayout, QPageContainer, Quasar } from 'quasar';
import { createMemoryHistory, createRouter, type RouteRecordRaw, type Router } from 'vue-router';
import { vi } from 'vitest';

import type { User } from '@shared/auth';
import routes from '@/router/routes';

const Stub: Component = { name: 'RouteStub', render: () => h('div') };

/** The app's routes (same paths, names and meta) with every lazy page replaced by a stub, so that a
 * navigation inside a test does not load other pages. */
export function stubbedRoutes(records: readonly RouteRecordRaw[] = routes): RouteRecordRaw[] {
  return records.map((record) => {
    const copy = { ...record } as RouteRecordRaw & { component?: unknown; children?: RouteRecordRaw[] };
    if (copy.component) copy.component = Stub;
    if (copy.children) copy.children = stubbedRoutes(copy.children);
    return copy as RouteRecordRaw;
  });
}

export interface MountOptions {
  /** Start the router here (e.g. '/projects/7'). */
  path?: string;
  /** The signed-in user put into the auth store; null for nobody. */
  user?: User | null;
  props?: Record<string, unknown>;
  /** Use this router instead of a plain one with the app's routes (e.g. one with the app's guards). */
  router?: Router;
}

const mounted: { unmount: () => void }[] = [];

/** Unmounts everything mountPage mounted (call in afterEach); Quasar's notification area stays. */
export function unmountAll(): void {
  for (const wrapper of mounted.splice(0)) wrapper.unmount();
}

export async function mountPage(page: Component, options: MountOptions = {}) {
  const router = options.router ?? createRouter({ history: createMemoryHistory(), routes: stubbedRoutes() });
  const pinia = createTestingPinia({
    createSpy: vi.fn,
    stubActions: false,
    initialState: { auth: { user: options.user ?? null, checked: true } },
  });
  await router.push(options.path ?? '/');
  await router.isReady();
  const Wrapper: Component = {
    name: 'TestFrame',
    render: () =>
      h(
        QLayout,
        { view: 'hHh lpR fFf' },
        { default: () => h(QPageContainer, null, { default: () => h(page, options.props) }) },
      ),
  };
  const wrapper = mount(Wrapper, {
    attachTo: document.body,
    global: { plugins: [[Quasar, { plugins: { Notify, Dialog } }], pinia, router] },
  });
  mounted.push(wrapper);
  await flushPromises();
  return { wrapper, router, pinia };
}

/** Text of everything in the document, including notifications and dialogs rendered outside the wrapper. */
export function pageText(): string {
  return document.body.textContent ?? '';
}

/** Texts of the notifications on screen. */
export function notifications(): string[] {
  return [...document.querySelectorAll('.q-notification')].map((node) => node.textContent ?? '');
}

/** Lets Quasar's transitions and timers run out. */
export async function settle(): Promise<void> {
  await flushPromises();
  await new Promise((resolve) => setTimeout(resolve, 0));
  await flushPromises();
}

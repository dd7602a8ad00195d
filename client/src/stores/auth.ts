// Who is signed in: token and account in sessionStorage (gone when the tab closes), expiry, sign-out.
import { defineStore } from 'pinia';
import type { Router } from 'vue-router';
import { pageAccess } from '@shared/access';
import type { PublicUser } from '@shared/auth';
import type { Role } from '@shared/roles';
import * as authApi from '@/api/auth';
import { configureHttp } from '@/api/http';

const STORAGE_KEY = 'plumbline.session';

interface StoredSession {
  token: string;
  expiresAt: number; // epoch ms
  user: PublicUser;
}

function readStored(): StoredSession | null {
  try {
    const raw = sessionStorage.getItem(STORAGE_KEY);
    if (!raw) return null;
    const s = JSON.parse(raw) as StoredSession;
    return s.token && s.user && s.expiresAt > Date.now() ? s : null;
  } catch {
    return null;
  }
}

let expiryTimer: ReturnType<typeof setTimeout> | undefined;

export const useAuthStore = defineStore('auth', {
  state: () => {
    const s = readStored();
    return {
      token: s?.token ?? null,
      expiresAt: s?.expiresAt ?? 0,
      user: s?.user ?? null,
      /** Shown once on the sign-in page (e.g. why the session ended). */
      notice: null as string | null,
    };
  },
  getters: {
    signedIn: (state): boolean => !!state.token && !!state.user && state.expiresAt > Date.now(),
    role: (state): Role | null => state.user?.role ?? null,
  },
  actions: {
    start(session: { token: string; expiresInSeconds: number; user: PublicUser }) {
      this.token = session.token;
      this.user = session.user;
      this.expiresAt = Date.now() + session.expiresInSeconds * 1000;
      this.notice = null;
      sessionStorage.setItem(
        STORAGE_KEY,
        JSON.stringify({ token: this.token, expiresAt: this.expiresAt, user: this.user }),
      );
      this.scheduleExpiry();
    },
    async login(email: string, password: string) {
      this.start(await authApi.login({ email, password }));
    },
    /** Re-reads the account (its role may have changed since the token was issued). */
    async refresh() {
      if (!this.token) return;
      const { user } = await authApi.me();
      this.user = user;
      sessionStorage.setItem(STORAGE_KEY, JSON.stringify({ token: this.token, expiresAt: this.expiresAt, user }));
    },
    async changePassword(currentPassword: string, newPassword: string) {
      this.start(await authApi.changePassword({ currentPassword, newPassword }));
    },
    logout(notice: string | null = null) {
      this.token = null;
      this.user = null;
      this.expiresAt = 0;
      this.notice = notice;
      sessionStorage.removeItem(STORAGE_KEY);
      clearTimeout(expiryTimer);
    },
    scheduleExpiry() {
      clearTimeout(expiryTimer);
      if (!this.token) return;
      // setTimeout overflows past ~24.8 days; tokens are short-lived, but cap it anyway.
      const wait = Math.min(Math.max(this.expiresAt - Date.now(), 0), 2 ** 31 - 1);
      expiryTimer = setTimeout(() => sessionEnded?.('Your session has expired. Please sign in again.'), wait);
    },
  },
});

let sessionEnded: ((message: string) => void) | undefined;

/** Connects the store, the HTTP client and the router: a dead session sends the user to sign-in. */
export function installSessionHandling(router: Router): void {
  const auth = useAuthStore();
  sessionEnded = (message: string) => {
    if (!auth.token) return;
    auth.logout(message);
    const here = router.currentRoute.value;
    if (pageAccess(here.name) === 'public') return;
    void router.replace({ name: 'sign-in', query: { redirect: here.fullPath } });
  };
  configureHttp({ token: () => auth.token, unauthorized: (message) => sessionEnded?.(message) });
  if (auth.token) {
    auth.scheduleExpiry();
    // A stored session may be stale: the server's answer decides (a 401 lands in sessionEnded).
    auth.refresh().catch(() => {});
  }
}

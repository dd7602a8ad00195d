// Each demo role signs in through the form and sees exactly its own navigation; a wrong password
// gets the same generic refusal as an unknown e-mail.
import type { Page } from 'playwright-core';
import { describe, expect, it } from 'vitest';
import { ROLE_LABELS, ROLES } from '@shared/roles';
import { navigation, navigationFor } from '../../client/src/navigation';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, signIn, submitSignIn, useAppAndBrowser } from '../helpers/browser';

const email = (role: string) => `${role}@demo.test`;
const browser = useAppAndBrowser();

const mainNavigation = (page: Page) => page.getByRole('navigation', { name: 'Main navigation' });

async function navigationTitles(page: Page): Promise<string[]> {
  const links = mainNavigation(page).getByRole('link');
  await links.first().waitFor();
  return (await links.allInnerTexts()).map((t) => t.trim());
}

const signInButton = (page: Page) => page.getByRole('button', { name: 'Sign in' });
const leftSignIn = (page: Page) => page.waitForURL((url) => !url.pathname.startsWith('/sign-in'));

describe('sign-in in the browser', () => {
  it('refuses a wrong password and an unknown e-mail with the same generic message', () =>
    inTab(browser(), 'signin-wrong-password', async (page) => {
      await submitSignIn(page, email('clinician'), 'not-the-password-1');
      const error = page.getByTestId('sign-in-error');
      await error.waitFor();
      const wrongPassword = (await error.innerText()).trim();
      expect(wrongPassword).toMatch(/not correct/i);
      expect(new URL(page.url()).pathname).toBe('/sign-in');
      expect(await page.evaluate(() => sessionStorage.getItem('plumbline.session'))).toBeNull();
      await screenshot(page, 'signin-wrong-password');

      await submitSignIn(page, 'nobody-here@demo.test', 'not-the-password-1');
      await page.getByTestId('sign-in-error').waitFor();
      expect((await page.getByTestId('sign-in-error').innerText()).trim()).toBe(wrongPassword);
    }));

  it('never disables the button for empty fields: pressing it shows what is missing', () =>
    inTab(browser(), 'signin-empty', async (page) => {
      await page.goto(`${appUrl}/sign-in`);
      await expect.poll(() => signInButton(page).isEnabled()).toBe(true);
      await signInButton(page).click();
      await page.getByText('Required').first().waitFor();
      expect(await page.getByText('Required').count()).toBe(2);
      expect(new URL(page.url()).pathname).toBe('/sign-in');
    }));

  it('signs in with Enter in the password field', () =>
    inTab(browser(), 'signin-enter', async (page) => {
      await page.goto(`${appUrl}/sign-in`);
      await page.getByLabel('E-mail').fill(email('statistician'));
      await page.getByLabel('Password', { exact: true }).fill(DEMO_PASSWORD);
      await page.getByLabel('Password', { exact: true }).press('Enter');
      await leftSignIn(page);
      expect(await page.evaluate(() => sessionStorage.getItem('plumbline.session'))).not.toBeNull();
    }));

  it('signs in when a password manager sets the fields without input events', () =>
    inTab(browser(), 'signin-autofill', async (page) => {
      await page.goto(`${appUrl}/sign-in`);
      await page.getByLabel('E-mail').waitFor();
      // Set the DOM values directly, as some password managers do: no input or change event reaches the app.
      await page.evaluate(
        ([user, secret]) => {
          (document.querySelector('input[name="email"]') as HTMLInputElement).value = user;
          (document.querySelector('input[name="password"]') as HTMLInputElement).value = secret;
        },
        [email('steward'), DEMO_PASSWORD],
      );
      await signInButton(page).click();
      await leftSignIn(page);
      expect(await page.evaluate(() => sessionStorage.getItem('plumbline.session'))).not.toBeNull();
    }));

  it('sends a signed-out visitor to sign-in and back to the page they wanted', () =>
    inTab(browser(), 'signin-redirect', async (page) => {
      await page.goto(`${appUrl}/account`);
      await page.waitForURL((url) => url.pathname === '/sign-in');
      expect(new URL(page.url()).searchParams.get('redirect')).toBe('/account');
      await page.getByLabel('E-mail').fill(email('steward'));
      await page.getByLabel('Password', { exact: true }).fill(DEMO_PASSWORD);
      await signInButton(page).click();
      await page.waitForURL((url) => url.pathname === '/account');
      await page.getByRole('heading', { name: 'My account' }).waitFor();
    }));

  it('ends a session the server no longer accepts and says why on the sign-in page', () =>
    inTab(browser(), 'signin-ended', async (page) => {
      await signIn(page, email('chair'));
      // Spoil the stored token's signature: the next API call answers 401.
      await page.evaluate(() => {
        const s = JSON.parse(sessionStorage.getItem('plumbline.session')!);
        s.token = `${s.token.slice(0, -4)}AAAA`;
        sessionStorage.setItem('plumbline.session', JSON.stringify(s));
      });
      await page.goto(`${appUrl}/account`);
      await page.waitForURL((url) => url.pathname === '/sign-in');
      await page.getByTestId('sign-in-notice').waitFor();
      expect(await page.getByTestId('sign-in-notice').innerText()).toMatch(/session has ended/i);
      expect(await page.evaluate(() => sessionStorage.getItem('plumbline.session'))).toBeNull();
    }));

  for (const role of ROLES) {
    it(`shows the ${role} exactly the ${role}'s navigation`, () =>
      inTab(browser(), `signin-${role}`, async (page) => {
        await signIn(page, email(role));
        expect(new URL(page.url()).pathname).toBe('/');

        const expected = navigationFor(role).map((item) => item.title);
        expect(await navigationTitles(page)).toEqual(expected);
        const hidden = navigation.filter((item) => !item.roles.includes(role)).map((item) => item.title);
        for (const title of hidden) {
          expect(await mainNavigation(page).getByRole('link', { name: title }).count()).toBe(0);
        }

        // The landing page speaks to this role.
        await page.getByText(ROLE_LABELS[role], { exact: true }).first().waitFor();
        const caution = page.getByRole('note', { name: 'Clinical-use caution' });
        if (role === 'clinician') {
          await caution.first().waitFor();
          expect(await caution.count()).toBe(1);
          expect(await caution.innerText()).toMatch(/not medical advice/i);
        } else {
          expect(await caution.count()).toBe(0);
        }

        await page.evaluate(() => document.fonts.ready);
        await screenshot(page, `signin-${role}`);

        // Hiding a link is not the guard: a non-admin who types the address is told plainly.
        if (role !== 'admin') {
          await page.goto(`${appUrl}/admin/accounts`);
          await page.waitForURL((url) => url.pathname === '/forbidden');
          await page.getByText('You may not open this page').waitFor();
        } else {
          await mainNavigation(page).getByRole('link', { name: 'Accounts' }).click();
          await page.waitForURL((url) => url.pathname === '/admin/accounts');
          // Other tests add accounts: find the demo ones as a person would, with the search field.
          await page.getByRole('textbox', { name: 'Find by name, e-mail or role' }).fill('@demo.test');
          for (const r of ROLES) await page.getByRole('cell', { name: email(r), exact: true }).waitFor();
          await screenshot(page, 'admin-accounts');

          await mainNavigation(page).getByRole('link', { name: 'Audit trail' }).click();
          await page.waitForURL((url) => url.pathname === '/admin/audit');
          await page.getByRole('cell', { name: 'auth.login', exact: true }).first().waitFor();
          await page.getByRole('button', { name: 'Check the chain' }).click();
          await page.getByTestId('chain-result').waitFor();
          expect(await page.getByTestId('chain-result').innerText()).toMatch(/chain is unbroken/i);
          await screenshot(page, 'admin-audit');
        }

        // Signing out from the account menu ends the session.
        await page.getByRole('button', { name: 'Account menu' }).click();
        await page.getByRole('listitem').filter({ hasText: 'Sign out' }).click();
        await page.waitForURL((url) => url.pathname === '/sign-in');
        expect(await page.evaluate(() => sessionStorage.getItem('plumbline.session'))).toBeNull();
      }));
  }
});

// The built-in identity provider's own pages: plain HTML in Plumbline's look, no scripts inline
// (the Content-Security-Policy allows none) and nothing from another origin.

import { demoAccounts } from '../services/demo/accounts';

const escape = (value: string) =>
  value.replace(/[&<>"']/g, (ch) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[ch]!);

function page(title: string, body: string, script?: string): string {
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escape(title)} · Plumbline</title>
<link rel="stylesheet" href="/idp-assets/idp.css">
${script ? `<script src="/idp-assets/${script}" defer></script>` : ''}
</head>
<body>
<main class="card" id="main">
<p class="brand"><svg aria-hidden="true" viewBox="0 0 24 24" width="28" height="28"><path d="M12 2v11" stroke="currentColor" stroke-width="2" stroke-linecap="round"/><path d="M12 13l-4.5 6.5h9z" fill="currentColor"/></svg> Plumbline</p>
${body}
</main>
</body>
</html>`;
}

export function signInPage(opts: { action: string; email?: string; error?: string; demo: boolean }): string {
  const error = opts.error ? `<p class="error" role="alert" id="signin-error">${escape(opts.error)}</p>` : '';
  const described = opts.error ? ' aria-describedby="signin-error"' : '';
  const demo = opts.demo
    ? `<details class="demo"><summary>Demo sign-ins</summary><p>Every demo account uses the password <code>demo</code>:</p><ul>
${demoAccounts.map((a) => `<li><code>${escape(a.email)}</code> (${escape(a.label)})</li>`).join('\n')}</ul></details>`
    : '';
  return page(
    'Sign in',
    `<h1>Sign in</h1>
${error}
<form method="post" action="${escape(opts.action)}" novalidate>
<label for="email">Email</label>
<input id="email" name="email" type="email" autocomplete="username" required value="${escape(opts.email ?? '')}"${described} autofocus>
<label for="password">Password</label>
<input id="password" name="password" type="password" autocomplete="current-password" required${described}>
<button type="submit">Sign in</button>
</form>
${demo}`,
  );
}

export function signOutPage(form: string): string {
  // The provider asks the person to confirm; the app has already ended its own session, so a
  // small same-origin script confirms for them, and the button remains for browsers without it.
  return page(
    'Signing out',
    `<h1>Signing you out</h1>
<p>Your Plumbline session has ended on this device.</p>
${form}
<button type="submit" form="op.logoutForm" name="logout" value="yes" id="confirm-signout">Finish signing out</button>`,
    'confirm-sign-out.js',
  );
}

export function messagePage(title: string, message: string, link?: { href: string; label: string }): string {
  return page(title, `<h1>${escape(title)}</h1><p>${escape(message)}</p>${link ? `<p><a href="${escape(link.href)}">${escape(link.label)}</a></p>` : ''}`);
}

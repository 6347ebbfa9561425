import { describe, expect, it } from 'vitest';
import { ACCESS, ACTIONS, actingRole, mayDo, needsRoles, rolesFor, SCOPE_WORDS } from '../../../shared/access';
import { Role } from '../../../shared/roles';

// The access map is the one place that says who may do what; these checks walk the whole of it.

describe('the access map', () => {
  it('gives every action at least one role, each a known role id, none twice, and a scope with words', () => {
    expect(ACTIONS.length).toBeGreaterThan(15);
    for (const action of ACTIONS) {
      const { roles, scope } = ACCESS[action];
      expect(roles.length, action).toBeGreaterThan(0);
      for (const role of roles) expect(Role.options, `${action}: ${role}`).toContain(role);
      expect(new Set(roles).size, action).toBe(roles.length);
      expect(Object.keys(SCOPE_WORDS), action).toContain(scope);
      expect(SCOPE_WORDS[scope].length, action).toBeGreaterThan(10);
    }
  });

  it('leaves no role without anything to do', () => {
    const used = new Set(ACTIONS.flatMap((action) => rolesFor(action)));
    expect([...used].sort()).toEqual([...Role.options].sort());
  });

  it('opens an action to a person holding any one of its roles, and to nobody else', () => {
    for (const action of ACTIONS) {
      for (const role of Role.options) expect(mayDo([role], action), `${action} / ${role}`).toBe(rolesFor(action).includes(role));
      expect(mayDo([], action), action).toBe(false);
    }
  });

  it('records a person with several roles in the first of the action’s roles they hold', () => {
    // Someone who is both administrator and trauma lead publishes as the trauma lead, and drafts as the administrator.
    expect(actingRole(['admin', 'trauma_lead'], 'policies.publish')).toBe('trauma_lead');
    expect(actingRole(['admin', 'trauma_lead'], 'policies.draft')).toBe('admin');
    expect(actingRole(['admin', 'quality'], 'quality.manage')).toBe('quality');
    expect(actingRole(['paramedic'], 'board.act')).toBeUndefined();
  });

  it('names the roles that would do in a refusal', () => {
    expect(needsRoles('people.manage')).toBe('This needs one of these roles: admin.');
    expect(needsRoles('review.read')).toBe('This needs one of these roles: trauma_lead, admin, quality.');
  });
});

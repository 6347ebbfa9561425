import { describe, expect, it } from 'vitest';
import { ACTIONS, canOpen, rolesFor } from '../../../shared/access';
import { Role } from '../../../shared/roles';

// The client's route guard and navigation decide with canOpen; it must say exactly what the map says.

describe('the client route guard', () => {
  it('opens a screen to the roles of its action in the access map, and to no other', () => {
    for (const action of ACTIONS) {
      for (const role of Role.options) expect(canOpen({ access: action }, [role]), `${action} / ${role}`).toBe(rolesFor(action).includes(role));
    }
  });

  it('opens a screen without an action to anyone signed in, and a public one to all', () => {
    expect(canOpen({}, [])).toBe(true);
    expect(canOpen({ access: 'people.manage', public: true }, [])).toBe(true);
    expect(canOpen({ access: 'people.manage' }, ['paramedic', 'charge_nurse', 'trauma_lead', 'quality'])).toBe(false);
  });
});

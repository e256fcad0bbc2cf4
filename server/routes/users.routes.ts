import { z } from 'zod';
import { createUserRequest, idParam, updateUserRequest, userOut } from '../../shared/contracts/auth.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

export function usersRoutes(ctx: AppContext): RouteDef[] {
  const svc = services(ctx).users;
  const common = { role: 'admin' as const, sessionOnly: true, tag: 'users' };
  return [
    defineRoute({ ...common, method: 'get', path: '/users', summary: 'List users', response: z.array(userOut), handler: () => svc.list() }),
    defineRoute({
      ...common,
      method: 'post',
      path: '/users',
      summary: 'Create a user',
      status: 201,
      body: createUserRequest,
      response: userOut,
      handler: ({ body, principal }) => svc.create(principal, body),
    }),
    defineRoute({
      ...common,
      method: 'patch',
      path: '/users/:id',
      summary: 'Change a user (name, role, password, disabled)',
      params: idParam,
      body: updateUserRequest,
      response: userOut,
      handler: ({ params, body, principal }) => svc.update(principal, params.id, body),
    }),
    defineRoute({
      ...common,
      method: 'delete',
      path: '/users/:id',
      summary: 'Delete a user (and its tokens)',
      params: idParam,
      response: z.object({ ok: z.literal(true) }),
      handler: ({ params, principal }) => svc.remove(principal, params.id),
    }),
  ];
}

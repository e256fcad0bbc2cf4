import { z } from 'zod';
import { createUserRequest, idParam, updateUserRequest, userOut } from '../../shared/contracts/auth.ts';
import type { AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { userService } from '../services/user.service.ts';

export function usersRoutes(ctx: AppContext): RouteDef[] {
  const svc = userService(ctx);
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
      handler: ({ body, req }) => svc.create(req, body),
    }),
    defineRoute({
      ...common,
      method: 'patch',
      path: '/users/:id',
      summary: 'Change a user (name, role, password, disabled)',
      params: idParam,
      body: updateUserRequest,
      response: userOut,
      handler: ({ params, body, req }) => svc.update(req, params.id, body),
    }),
    defineRoute({
      ...common,
      method: 'delete',
      path: '/users/:id',
      summary: 'Delete a user (and its tokens)',
      params: idParam,
      response: z.object({ ok: z.literal(true) }),
      handler: ({ params, req }) => svc.remove(req, params.id),
    }),
  ];
}

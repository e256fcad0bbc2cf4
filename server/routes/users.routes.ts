import type { Request } from 'express';
import { z } from 'zod';
import { createUserRequest, idParam, updateUserRequest, userOut } from '../../shared/contracts/auth.ts';
import type { AppContext } from '../app-context.ts';
import type { RouteDef } from '../http/route.ts';
import { userService } from '../services/user.service.ts';

export function usersRoutes(ctx: AppContext): RouteDef[] {
  const svc = userService(ctx);
  const common = { role: 'admin' as const, sessionOnly: true, tag: 'users' };
  return [
    { ...common, method: 'get', path: '/users', summary: 'List users', response: z.array(userOut), handler: () => svc.list() },
    {
      ...common,
      method: 'post',
      path: '/users',
      summary: 'Create a user',
      status: 201,
      body: createUserRequest,
      response: userOut,
      handler: (req: Request) => svc.create(req, req.valid.body as z.infer<typeof createUserRequest>),
    },
    {
      ...common,
      method: 'patch',
      path: '/users/:id',
      summary: 'Change a user (name, role, password, disabled)',
      params: idParam,
      body: updateUserRequest,
      response: userOut,
      handler: (req: Request) => svc.update(req, (req.valid.params as { id: number }).id, req.valid.body as z.infer<typeof updateUserRequest>),
    },
    {
      ...common,
      method: 'delete',
      path: '/users/:id',
      summary: 'Delete a user (and its tokens)',
      params: idParam,
      response: z.object({ ok: z.literal(true) }),
      handler: (req: Request) => svc.remove(req, (req.valid.params as { id: number }).id),
    },
  ];
}

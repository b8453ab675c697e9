import type { FastifyPluginAsyncZod } from 'fastify-type-provider-zod';
import { z } from 'zod';
import { recomputedExplanationSchema } from '../../contracts/explanation.js';
import { commonErrors, jsonResponse, problemResponse } from '../shared-schemas.js';

export const requestIdParam = z.object({ id: z.string().min(1).max(64, 'a request id has at most 64 characters').describe('request_id of a scored answer') });


const explanations: FastifyPluginAsyncZod = async (app) => {
  app.get(
    '/requests/:id/explanation',
    {
      config: { access: 'reader' },
      schema: {
        summary: 'Recompute the explanation of a logged answer',
        description:
          'Integrated gradients of the answered label and the nearest label change per feature, recomputed from the logged vector and the bundle that answered (loaded, or the copy the audit log keeps). `explained` says whether the answer carried it.',
        tags: ['audit'],
        params: requestIdParam,
        response: { 200: jsonResponse('the explanation, as the answer carried or would have carried it', recomputedExplanationSchema), 404: problemResponse('no scored request has that id, or its bundle is neither loaded nor stored'), ...commonErrors },
      },
    },
    async (req) => app.explanations.recompute(req.params.id),
  );
};

export default explanations;

import type { Response } from 'express';

import type { CreateInjectionStudyOutput, NumberCountsQuery } from '../../shared/injection';
import { tableDownload } from '../catalogue/downloads';
import type { AppContext } from '../context';
import type { ApiRequest } from '../http/api-route';
import { currentUser } from '../http/guards';
import { sendDownload } from '../http/send-download';
import { runOf } from '../runs/run-access';
import * as studies from './injection.service';

type StudyParams = { id: number; studyId: number };
type ExportQuery = { table: 'completeness' | 'false-sources'; format: 'csv' | 'votable' | 'fits' };

export function injectionController(ctx: AppContext) {
  return {
    async create(req: ApiRequest<CreateInjectionStudyOutput, { id: number }>, res: Response) {
      const study = await studies.createStudy(ctx, currentUser(req), runOf(res), req.body);
      res
        .status(202)
        .location(`/api/runs/${study.runId}/injection-studies/${study.id}`)
        .json(studies.toStudyBody(study));
    },
    async list(_req: ApiRequest<unknown, { id: number }>, res: Response) {
      res.json({ studies: await studies.listStudies(runOf(res).id) });
    },
    async show(req: ApiRequest<unknown, StudyParams>, res: Response) {
      res.json(await studies.studyDetail(await studies.findStudy(runOf(res).id, req.params.studyId)));
    },
    async cancel(req: ApiRequest<unknown, StudyParams>, res: Response) {
      res.json(studies.toStudyBody(await studies.cancelStudy(ctx, runOf(res).id, req.params.studyId)));
    },
    async remove(req: ApiRequest<unknown, StudyParams>, res: Response) {
      await studies.deleteStudy(runOf(res).id, req.params.studyId);
      res.status(204).end();
    },
    async exportTable(req: ApiRequest<unknown, StudyParams, ExportQuery>, res: Response) {
      const run = runOf(res);
      const study = await studies.findStudy(run.id, req.params.studyId);
      sendDownload(res, await studies.studyExport(ctx, run, study, req.query));
    },
    async numberCounts(req: ApiRequest<unknown, { id: number }, NumberCountsQuery>, res: Response) {
      const run = runOf(res);
      const answer = await studies.runNumberCounts(ctx, run, req.query);
      const { format } = req.query;
      if (format === 'json') return void res.json(answer.counts);
      sendDownload(res, tableDownload(answer.table(), `skysieve-run-${run.id}-number-counts`, format));
    },
  };
}

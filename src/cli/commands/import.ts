import type { Command } from 'commander';
import { DOMAIN_DEFAULTS, OPTIONAL_DETECTORS } from '../../bundle/domain-fit.js';

const SINGLE_NETWORK_DETECTORS = OPTIONAL_DETECTORS.filter((d) => d !== 'disagreement');
import { buildTime } from '../../config/config.js';
import { DEFAULT_TRAIN_OPTIONS } from '../../core/train.js';
import { type ImportContext, importAction } from '../actions/import.js';
import { processIo } from '../io.js';
import { integerIn, list, listOf, numberIn } from '../options.js';

export function registerImport(program: Command): void {
  program
    .command('import')
    .description('seal a network trained elsewhere (ONNX) into a verified bundle, with the reference and domain detectors of its training data')
    .requiredOption('--onnx <file.onnx>', 'the exported network: a dense feed-forward classifier (docs/models.md lists the ops)')
    .requiredOption('--data <file.csv>', 'the data it was trained on, RFC 4180 CSV with a header row')
    .requiredOption('--label <column>', 'column holding the class of each row')
    .option('--features <a,b,...>', 'columns in the order the graph takes them (default: every column but the label, in file order)', list)
    .option('--classes <c0,c1,...>', 'the class of each output, in order (default: the sorted labels, numerically when all are numbers)', list)
    .option('--preprocess <file.json>', '{"mean": [...], "scale": [...]}: (x - mean) / scale before the graph, when it expects standardised input')
    .option('--calibrate-on <file.csv>', 'labelled held-out rows: fit the temperature and calibrate the domain flag on them (default: temperature 1, flag calibrated on --data)')
    .option('--feature-info <file.json>', 'units and descriptions: {"name": {"unit": "degC", "description": "..."}}')
    .option('--tolerance <x>', 'envelope widening, as a share of the 0.1%-99.9% range', numberIn(0, 100), DOMAIN_DEFAULTS.tolerance)
    .option('--review-margin <x>', 'answers with a smaller margin are marked for review', numberIn(0, 1), DOMAIN_DEFAULTS.reviewMargin)
    // One imported network has no members to disagree: disagreement is not offered.
    .option('--detectors <a,b,...>', `domain detectors that vote with the envelope: ${SINGLE_NETWORK_DETECTORS.join(', ')}`, listOf(SINGLE_NETWORK_DETECTORS), [...SINGLE_NETWORK_DETECTORS])
    .option('--keep-weak', 'keep in the vote a detector that separates none of the generated out-of-domain probes (AUROC below 0.6 in every family)', false)
    .option('--in-domain-rate <x>', 'share of held-out in-domain rows the domain flag is calibrated to pass', numberIn(0.5, 0.99999), DOMAIN_DEFAULTS.inDomainRate)
    .option('--seed <n>', 'seed of the reference sample and the probes', integerIn(0, 4294967295), DEFAULT_TRAIN_OPTIONS.seed)
    .requiredOption('--name <name>', 'model name, [a-z0-9][a-z0-9._-]{0,63}')
    .option('--version <v>', 'model version, [A-Za-z0-9._-]{1,64}', '1')
    .requiredOption('--out <file.bundle.json>', 'where to write the bundle')
    .action(async (flags: Omit<ImportContext, 'createdAt'>) => {
      await importAction({ ...flags, createdAt: buildTime() }, processIo());
    });
}

import type { Command } from 'commander';
import { ACTIVATIONS } from '../../core/activations.js';
import { DEFAULT_TRAIN_OPTIONS } from '../../core/train.js';
import { DOMAIN_DEFAULTS, OPTIONAL_DETECTORS } from '../../bundle/domain-fit.js';
import { buildTime } from '../../config/config.js';
import { type TrainContext, trainAction } from '../actions/train.js';
import { processIo } from '../io.js';
import { integerIn, integerList, list, listOf, numberIn, oneOf } from '../options.js';

/** What commander parses: the action's context, with the split under its flag's name. */
type TrainFlags = Omit<TrainContext, 'validationFraction' | 'createdAt'> & { validationSplit: number };

/** What `train` does when no flag says otherwise; the demo build and the tests start from it too. */
export const TRAIN_DEFAULTS = {
  ...DEFAULT_TRAIN_OPTIONS,
  folds: 5,
  validationFraction: 0.2,
  balance: false,
  tolerance: DOMAIN_DEFAULTS.tolerance,
  reviewMargin: DOMAIN_DEFAULTS.reviewMargin,
  detectors: [...OPTIONAL_DETECTORS],
  keepWeak: false,
  inDomainRate: DOMAIN_DEFAULTS.inDomainRate,
  version: '1',
} as const satisfies Partial<TrainContext>;

export function registerTrain(program: Command): void {
  const d = TRAIN_DEFAULTS;
  program
    .command('train')
    .description('train a classifier on a labelled CSV and write a verified bundle')
    .requiredOption('--data <file.csv>', 'training data, RFC 4180 CSV with a header row')
    .requiredOption('--label <column>', 'column holding the class of each row')
    .option('--features <a,b,...>', 'feature columns in order (default: every column but the label and the ignored ones)', list)
    .option('--ignore <a,b,...>', 'columns that are not features, such as the request_id and received_at of plumbline export', list)
    .option('--feature-info <file.json>', 'units and descriptions: {"name": {"unit": "degC", "description": "..."}}')
    .option('--hidden <n,n,...>', 'hidden layer widths', integerList(1, 4096), d.hidden)
    .option('--activation <name>', `hidden activation: ${ACTIVATIONS.join(', ')}`, oneOf(ACTIVATIONS), d.activation)
    .option('--alpha <x>', 'alpha of leaky_relu (default 0.01) or elu (default 1)', numberIn(0, 100))
    .option('--epochs <n>', 'most epochs to train; early stopping usually ends sooner', integerIn(1, 100000), d.epochs)
    .option('--batch-size <n>', 'rows per mini-batch', integerIn(1, 65536), d.batchSize)
    .option('--learning-rate <x>', 'Adam step size', numberIn(0, 10, { exclusiveMin: true }), d.learningRate)
    .option('--weight-decay <x>', 'decoupled weight decay', numberIn(0, 1), d.weightDecay)
    .option('--patience <n>', 'epochs without a better validation loss before stopping', integerIn(1, 100000), d.patience)
    .option('--folds <k>', 'cross-fitting: k networks, each trained without one of k stratified folds, answer together; every row is calibrated and evaluated by networks that never saw it (1: one network and a hold-out, for large data)', integerIn(1, 32), d.folds)
    .option('--validation-split <x>', 'share of each network\'s rows its early stopping watches (with --folds 1, the hold-out that also calibrates)', numberIn(0, 0.9), d.validationFraction)
    .option('--balance', 'weight classes by n / (classes x class count)', d.balance)
    .option('--seed <n>', 'seed of every random choice; same data, options, seed and SOURCE_DATE_EPOCH give the same bundle', integerIn(0, 4294967295), d.seed)
    .option('--tolerance <x>', 'envelope widening, as a share of the 0.1%-99.9% range', numberIn(0, 100), d.tolerance)
    .option('--review-margin <x>', 'answers with a smaller margin are marked for review', numberIn(0, 1), d.reviewMargin)
    .option('--detectors <a,b,...>', `domain detectors that vote with the envelope: ${OPTIONAL_DETECTORS.join(', ')}`, listOf(OPTIONAL_DETECTORS), [...d.detectors])
    .option('--keep-weak', 'keep in the vote a detector that separates none of the generated out-of-domain probes (AUROC below 0.6 in every family)', d.keepWeak)
    .option('--in-domain-rate <x>', 'share of held-out in-domain rows the domain flag is calibrated to pass', numberIn(0.5, 0.99999), d.inDomainRate)
    .option('--calibrate-on <file.csv>', 'in-domain rows no network trained on, to calibrate the flag on instead of the out-of-fold rows')
    .requiredOption('--name <name>', 'model name, [a-z0-9][a-z0-9._-]{0,63}')
    .option('--version <v>', 'model version, [A-Za-z0-9._-]{1,64}', d.version)
    .requiredOption('--out <file.bundle.json>', 'where to write the bundle')
    .action(async (flags: TrainFlags) => {
      const { validationSplit, ...rest } = flags;
      await trainAction({ ...rest, validationFraction: validationSplit, createdAt: buildTime() }, processIo());
    });
}

// train (map_builder.h): the global descriptor model from evenly spaced survey images.
#include <algorithm>

#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"
#include "indexer/builder/staging.h"

namespace sightfix::staging {
namespace {

using namespace build_internal;

// Every step-th row of ALL (at most train_images of them), features not yet extracted.
Survey EvenlySpaced(const Survey& all, int train_images) {
  const size_t n = all.rows.size();
  const size_t step = std::max<size_t>(1, (n + train_images - 1) / train_images);
  std::vector<int> rows;
  for (size_t i = 0; i < n; i += step) rows.push_back(static_cast<int>(i));
  return SubSurvey(all, rows);
}

// model.bin and model.json under MAPDIR/staging; fills the summary's model fields.
Status StageModel(const BuildOptions& o, const GlobalDescriptor& model, TrainSummary* summary) {
  const std::vector<uint8_t> blob = model.Serialize();
  summary->model_id = Sha256Hex(blob).substr(0, 16);
  summary->codec = model.codec_name();
  summary->model_file = ModelFile(o.map_dir).string();
  if (Status st = WriteFileAtomically(o.env, summary->model_file, blob.data(), blob.size());
      !st.ok())
    return st;
  const json info{{"model_id", summary->model_id},
                  {"codec", summary->codec},
                  {"training_vectors", summary->training_vectors},
                  {"params", ModelParams(model, summary->training_vectors)},
                  {"survey_images", summary->survey_images},
                  {"sampled_images", summary->sampled_images}};
  return WriteJson(o.env, ModelInfoFile(o.map_dir), info);
}

}  // namespace

Result<TrainSummary> TrainImpl(const BuildOptions& o, FeatureCache* cache) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (o.train_images < 1) return Status::InvalidArgument("train_images must be >= 1");
  PinLibraryThreads();
  const Stopwatch total(o.env);
  TrainSummary summary;
  std::string format;
  Result<Survey> all = ReadRows(o, &format, &summary.skipped);
  if (!all.ok()) return all.status();
  summary.survey_images = static_cast<int>(all->rows.size());
  Survey sample = EvenlySpaced(*all, o.train_images);
  Say(o, "train: features of " + std::to_string(sample.rows.size()) + " of " +
             std::to_string(all->rows.size()) + " survey images");
  const Stopwatch features(o.env);
  if (Status st = ExtractAll(o, &sample, &summary.skipped, cache); !st.ok()) return st;
  summary.feature_s = features.Seconds();
  summary.sampled_images = static_cast<int>(sample.rows.size());
  if (summary.sampled_images <= o.descriptor.pq_subquantizers)
    return Status::InvalidArgument(
        "a map needs more than " + std::to_string(o.descriptor.pq_subquantizers) +
        " survey images, the survey has " + std::to_string(summary.sampled_images) + " usable");
  Say(o, "train: the global descriptor model");
  Result<GlobalDescriptor> model = TrainModel(o, sample, &summary.training_vectors);
  if (!model.ok()) return model.status();
  if (Status st = StageModel(o, *model, &summary); !st.ok()) return st;
  if (cache)
    for (size_t i = 0; i < sample.rows.size(); ++i)
      (*cache)[sample.rows[i].image] = std::move(sample.features[i]);
  summary.seconds = total.Seconds();
  return summary;
}

}  // namespace sightfix::staging

namespace sightfix {

Result<TrainSummary> TrainStep(const BuildOptions& options) {
  return staging::TrainImpl(options, nullptr);
}

}  // namespace sightfix

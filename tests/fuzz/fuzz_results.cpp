// libFuzzer harness: the listening-test results reader (`earshot tally`,
// dsp/cli/tally.cpp load, the condition labels and the MUSHRA paired
// comparisons). A bad file must end in InputError; any other
// exception, a crash or a sanitizer report is a finding.
// The reader lives in the file's unnamed namespace, so the file is included.
#include "../../dsp/cli/tally.cpp"

#include "scratch_file.hpp"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::string path = earshot_fuzz::scratch_file("results.json", data, size);
  try {
    const earshot::cli::Result r = earshot::cli::load(path);
    // What the tally computes from one file alone: labels and, for MUSHRA,
    // the paired comparisons (bounded by the 12 stimuli a trial may rate).
    std::vector<earshot::cli::Result> one{r};
    earshot::cli::label_conditions(one);
    if (r.type == "mushra")
      (void)earshot::cli::paired_rows(one, {&one[0]}, earshot::cli::item_order(one[0]), 0.95);
    // Two copies of one file must agree with each other.
    earshot::cli::check_consistent({r, r});
  } catch (const earshot::cli::InputError&) {
  }
  return 0;
}

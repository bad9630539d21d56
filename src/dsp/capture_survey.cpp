#include "dsp/capture_survey.hpp"

#include "core/error.hpp"
#include "dsp/period_lock.hpp"

namespace periodfit::dsp {

io::CaptureInfo survey_capture(const Capture& capture) {
  io::CaptureInfo info = io::describe(capture);
  for (std::size_t i = 0; i < capture.channels.size(); ++i) {
    io::ChannelStats& c = info.channels[i];
    if (c.levels <= 1) {
      c.f0_note = "constant channel";
      continue;
    }
    try {
      c.f0_hz = estimate_fundamental(capture.channels[i].samples, capture.sample_rate_hz).f0_hz;
    } catch (const AnalysisError& e) {
      // The reason is shown as is: it says what the data lacked (too short, only noise).
      c.f0_note = e.what();
    }
  }
  return info;
}

}  // namespace periodfit::dsp

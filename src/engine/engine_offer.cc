// The engine's data path in front of ingest(): the arrival hold (late and
// duplicate records) and the silence clock. See engine.h, arrival_hold.h and
// detect/silence.h.
#include "engine/engine.h"

namespace tallyd {

std::vector<Alert> Engine::advance_clock(TimePoint now) {
  std::vector<Alert> out = silence_.advance(now);
  // Like every alert the engine returns, a silence alert opens or continues
  // its series' low episode (engine.h).
  for (Alert& a : out) episodes_.on_alert(a);
  counters_.alerts_low += out.size();
  counters_.alerts_silence += out.size();
  return out;
}

void Engine::judge_released(std::vector<Observation>& ready, OfferResult& out) {
  for (Observation& obs : ready) {
    Released rel;
    // A record older than the clock (refused below as out_of_order) leaves it where it is.
    rel.silence = advance_clock(obs.time);
    rel.result = ingest(obs);
    rel.record = std::move(obs);
    out.released.push_back(std::move(rel));
  }
  ready.clear();
}

OfferResult Engine::offer(const Observation& obs) {
  OfferResult out;
  std::vector<Observation> ready;
  if (!hold_.active()) {
    // Records held before a reload set the tolerance to 0 go first, in order.
    if (hold_.held_count() > 0) {
      hold_.drain(ready);
      judge_released(ready, out);
    }
    Released rel;
    rel.silence = advance_clock(obs.time);
    rel.result = ingest(obs);
    rel.record = obs;
    out.released.push_back(std::move(rel));
    return out;
  }
  const ArrivalHold::Verdict verdict = hold_.offer(obs, ready, out.refused);
  if (verdict == ArrivalHold::Verdict::refused) {
    ++counters_.records;
    counters_.rejected.add(out.refused->reason);
  } else if (verdict == ArrivalHold::Verdict::replaced) {
    ++counters_.duplicates_replaced;
  }
  judge_released(ready, out);
  // The engine sees the world as of the hold's released time: silence is
  // judged on that clock too, so holding back delays silence alerts by T
  // instead of raising them for records that are merely held.
  if (auto through = hold_.released_through()) out.silence = advance_clock(*through);
  return out;
}

OfferResult Engine::tick(TimePoint now) {
  OfferResult out;
  std::vector<Observation> ready;
  hold_.tick(now, ready);
  judge_released(ready, out);
  const std::optional<TimePoint> through = hold_.active() ? hold_.released_through() : std::optional<TimePoint>(now);
  if (through) out.silence = advance_clock(*through);
  return out;
}

OfferResult Engine::drain() {
  OfferResult out;
  std::vector<Observation> ready;
  hold_.drain(ready);
  judge_released(ready, out);
  return out;
}

}  // namespace tallyd

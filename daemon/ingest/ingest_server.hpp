// IngestServer: lphid's ingest socket.
//
// The ingest socket (ZeroMQ ROUTER) takes batches of readings from senders
// (DEALER or REQ). Each batch is checked in full -- its envelope, every
// reading's keys, types and ranges, and the reading's time against what its
// source sent before -- and the readings that pass go to the StoreWriter. The
// reply, an acknowledgement listing every refused reading with its reason, is
// sent only after the writer's COMMIT: a sender that holds an ack holds a
// promise that the data are on disk. A message that cannot be read at all is
// answered with an error carrying its reason. Every refusal is counted.
//
// Back-pressure: when the writer's queue is full, the server holds the one
// batch it could not hand over and stops reading the socket until there is
// room again; ZeroMQ's bounded pipes then push back to the senders, who keep
// their unacknowledged readings. No queue grows without bound.
//
// The control socket is ControlServer's (daemon/control/control_server.hpp);
// this server exposes its state as a typed IngestStatus (status()), from
// which the status reply and lphid's health tick are made.
//
// lphid's own instrument drivers hand their readings in through
// offer_driver_readings(). They take exactly the path of a batch from the
// socket -- the same checks, counters, duplicate and gap handling, and the
// same writer -- only without an ack to send. Each source has one slot: a
// new offer is refused while the previous one is still waiting (for this
// thread, or for room in the writer's queue), and the driver keeps its
// readings and offers them again. So a writer that falls behind pushes back
// on the drivers exactly as it pushes back on the senders.
//
// All state lives on the thread that calls run(); the writer's commit
// callbacks only hand completions over through a mutex-guarded list and an
// eventfd. status() reads a snapshot that this thread refreshes before every
// reply it sends and on every turn of its loop, so a sender that holds an
// ack finds its readings counted.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <set>
#include <string>
#include <vector>
#include <zmq.hpp>

#include "daemon/config/config.hpp"
#include "daemon/config/data_dir.hpp"
#include "daemon/ingest/counters.hpp"
#include "daemon/ingest/ingest_status.hpp"
#include "schema/protocol/codec.hpp"
#include "daemon/store/writer.hpp"

namespace lphi::ingest {

struct IngestOptions {
  config::Endpoints endpoints;
  std::string data_dir;  // for the database size in status
  protocol::Limits limits;
  double time_backward_tolerance_s = 60.0;
  double time_future_tolerance_s = 86400.0;
  // Sources that lphid's own drivers read: the ingest socket refuses
  // batches for them (their sequence numbers belong to the driver).
  std::set<std::string> driver_sources;
  // Per-source overrides of time_future_tolerance_s, by source name.
  std::map<std::string, double> source_future_tolerance_s;
};

class IngestServer {
 public:
  // Binds the ingest socket. `sources` are the registered sources, by name.
  static Status create(zmq::context_t& context, const IngestOptions& options, store::StoreWriter& writer,
                       const std::map<std::string, store::SourceState>& sources,
                       std::unique_ptr<IngestServer>& out);
  ~IngestServer();
  IngestServer(const IngestServer&) = delete;
  IngestServer& operator=(const IngestServer&) = delete;

  // Serves until `stop` becomes true, then stops the writer, sends the acks of
  // what it committed last, and returns.
  void run(const std::atomic<bool>& stop);

  // From any thread, never blocking: readings a driver made for `source`.
  // False: not taken (the source's slot is busy, or the source is unknown);
  // offer them again later.
  bool offer_driver_readings(const std::string& source, protocol::Readings&& readings);
  // From any thread: what the instrument behind `source` says it is. Logged
  // and recorded in the store (instrument_identities).
  void offer_identity(const std::string& source, std::string identity);
  // From any thread: the counters, sources and writer statistics now.
  IngestStatus status() const;
  // Before run(): called about once a second on run()'s thread with the
  // status (lphid's health tick); must be quick.
  void set_tick_handler(std::function<void(const IngestStatus& status)> handler);

 private:
  struct Peer {
    bool internal = false;  // one of lphid's drivers: nothing to reply to
    std::string identity;
    bool delimiter = false;  // a REQ peer: replies need an empty frame
    protocol::Encoding encoding = protocol::Encoding::json;
  };
  struct SourceRuntime {
    store::SourceState state;
    std::string name;
    std::optional<std::int64_t> validated_seq;  // highest seq handed to the writer
    std::optional<double> validated_t;
    std::optional<std::int64_t> durable_seq;    // highest seq committed
    std::optional<double> last_t;               // t of the newest committed reading
    double last_arrival_unix = 0.0;
    double future_tolerance_s = 86400.0;
    bool has_driver = false;  // fed by one of lphid's drivers only
    std::string instrument_identity;
    std::uint64_t accepted = 0, duplicates = 0, rejected = 0;
    RateMeter rate;
  };
  struct Completion {
    Peer peer;
    protocol::Ack ack;
    store::WriteResult result;
    SourceRuntime* source = nullptr;
    std::optional<double> newest_t;
  };
  struct Held {
    Peer peer;
    store::WriteJob job;
    protocol::Ack ack;
    SourceRuntime* source = nullptr;
    std::optional<double> newest_t;
  };

  IngestServer(zmq::context_t& context, const IngestOptions& options, store::StoreWriter& writer);
  void on_ingest_message();
  void handle_request(const Peer& peer, std::string_view payload);
  void handle_batch(const Peer& peer, const nlohmann::json& message);
  void handle_hello(const Peer& peer, const nlohmann::json& message);
  void accept_readings(const Peer& peer, SourceRuntime& source, std::optional<std::uint64_t> batch_id,
                       const nlohmann::json& readings);
  void drain_driver_inbox();
  bool driver_inbox_empty();
  void write_what_was_taken();
  void submit_identities();
  bool submit(Held& held);
  void drain_completions();
  void finish(Completion& completion);
  void refuse(const Peer& peer, std::optional<std::uint64_t> batch_id, protocol::Reason reason,
              const std::string& detail);
  void reply(zmq::socket_t& socket, const Peer& peer, const nlohmann::json& message);
  zmq::pollitem_t poll_once();
  void take_completions_and_offers();
  void read_ingest_socket(const zmq::pollitem_t& item);
  void tick(double& last_tick);
  void publish_status();

  IngestOptions options_;
  store::StoreWriter& writer_;
  zmq::socket_t ingest_;
  int wake_fd_ = -1;
  std::map<std::string, std::unique_ptr<SourceRuntime>> sources_;
  IngestCounters counters_;
  std::optional<Held> held_;
  double started_unix_ = 0.0;

  std::function<void(const IngestStatus&)> tick_handler_;
  // The snapshot status() hands out; this thread refreshes it.
  mutable std::mutex status_mutex_;
  IngestStatus status_;
  // Driver hand-overs: one slot per source (keys fixed at create()), and
  // identities, guarded by inbox_mutex_; this thread takes them out.
  std::mutex inbox_mutex_;
  bool inbox_closed_ = false;  // stopping: offers are refused, the driver keeps its readings
  std::map<std::string, std::optional<protocol::Readings>> inbox_;
  std::vector<std::pair<std::string, std::string>> inbox_identities_;
  std::vector<std::pair<SourceRuntime*, std::string>> identities_to_store_;

  std::mutex completions_mutex_;
  std::vector<Completion> completions_;  // filled by the writer thread
};

}  // namespace lphi::ingest

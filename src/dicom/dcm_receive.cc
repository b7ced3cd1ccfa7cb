/*
 * dcm_receive.cc - the Storage SCP (with Verification). A supervisor
 * thread keeps exactly one connection thread waiting in DCMTK's accept;
 * as soon as DCMTK has accepted a connection (our transport layer's
 * createConnection() hook, before any byte is read) the supervisor starts
 * the next waiting thread, and the accepting one goes on to read the TLS
 * handshake and the A-ASSOCIATE-RQ and then serves the association with a
 * DcmThreadSCP subclass. Negotiations are counted per address and in all,
 * and closed (shutdown(2)) at a total deadline by the supervisor. Each
 * C-STORE is written byte for byte to the association's memory file and
 * handed to the C handler, whose status is the C-STORE response.
 */
#include "dicom/dcm_internal.h"

#include "dcmtk/dcmdata/dcuid.h"
#include "dcmtk/dcmnet/assoc.h"
#include "dcmtk/dcmnet/dcmlayer.h"
#include "dcmtk/dcmnet/dcmtrans.h"
#include "dcmtk/dcmnet/dul.h"
#include "dcmtk/dcmnet/scpthrd.h"
#include "dcmtk/dcmtls/tlslayer.h"

extern "C" {
#include "util/log.h"
}

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <sys/socket.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <chrono>
#include <condition_variable>
#include <cstdio>
#include <ctime>
#include <map>
#include <mutex>
#include <new>
#include <cstring>
#include <list>
#include <memory>
#include <string>
#include <sys/mman.h>
#include <sys/stat.h>
#include <thread>
#include <unistd.h>
#include <vector>

/* Accepted transfer syntaxes, most preferred first: a sender keeps its
 * compressed files as they are; uncompressed ones come last. */
static const char *const dcm_storage_transfer_syntaxes[] = {
    UID_JPEGProcess1TransferSyntax,
    UID_JPEGProcess2_4TransferSyntax,
    UID_JPEGProcess14SV1TransferSyntax,
    UID_JPEGProcess14TransferSyntax,
    UID_JPEGLSLosslessTransferSyntax,
    UID_JPEGLSLossyTransferSyntax,
    UID_JPEG2000LosslessOnlyTransferSyntax,
    UID_JPEG2000TransferSyntax,
    UID_RLELosslessTransferSyntax,
    UID_MPEG2MainProfileAtMainLevelTransferSyntax,
    UID_MPEG2MainProfileAtHighLevelTransferSyntax,
    UID_MPEG4HighProfileLevel4_1TransferSyntax,
    UID_MPEG4BDcompatibleHighProfileLevel4_1TransferSyntax,
    UID_MPEG4HighProfileLevel4_2_For2DVideoTransferSyntax,
    UID_MPEG4HighProfileLevel4_2_For3DVideoTransferSyntax,
    UID_MPEG4StereoHighProfileLevel4_2TransferSyntax,
    UID_HEVCMainProfileLevel5_1TransferSyntax,
    UID_HEVCMain10ProfileLevel5_1TransferSyntax,
    UID_LittleEndianExplicitTransferSyntax,
    UID_LittleEndianImplicitTransferSyntax,
    UID_DeflatedExplicitVRLittleEndianTransferSyntax,
    UID_BigEndianExplicitTransferSyntax,
};
static const char *const dcm_verification_transfer_syntaxes[] = {
    UID_LittleEndianExplicitTransferSyntax,
    UID_LittleEndianImplicitTransferSyntax,
};
static const char *dcm_verification_class[] = {UID_VerificationSOPClass};

enum {
    DCM_DEFAULT_ACSE_TIMEOUT = 5,
    DCM_DEFAULT_DIMSE_TIMEOUT = 30,
    DCM_DEFAULT_MAX_NEGOTIATIONS = 128,
    DCM_DEFAULT_MAX_NEGOTIATIONS_PER_ADDRESS = 8
};

struct dcm_association_thread {
    std::thread thread;
    std::atomic<bool> finished{false};
};

/* A connection accepted but not yet negotiated (TLS handshake and
 * A-ASSOCIATE-RQ), keyed by the thread reading it. */
struct dcm_negotiation {
    std::string peer;
    int watch_fd = -1; /* a duplicate of the socket, for shutdown(2) */
    std::chrono::steady_clock::time_point deadline;
    bool expired = false;
    bool refused = false; /* its first PDU was refused (already logged) */
};

struct dcm_server {
    /* Settings, copied. */
    std::string ae_title;
    unsigned port = 0;
    bool have_allowlist = false;
    std::vector<std::pair<std::string, std::string>> allowed_peers;
    unsigned max_associations = 1;
    unsigned max_negotiations = DCM_DEFAULT_MAX_NEGOTIATIONS;
    unsigned max_negotiations_per_address = DCM_DEFAULT_MAX_NEGOTIATIONS_PER_ADDRESS;
    unsigned acse_timeout = DCM_DEFAULT_ACSE_TIMEOUT;
    uint32_t max_pdu = ASC_DEFAULTMAXPDU;
    uint64_t max_object_bytes = 0;     /* 0 = no limit */
    uint64_t max_memory_in_flight = 0; /* 0 = no limit */
    std::string tls_certificate_file, tls_private_key_file, tls_ca_file;
    bool tls = false, tls_require_client = false;
    dcm_store_handler handler = NULL;
    void *context = NULL;
    metrics *monitoring = NULL; /* borrowed; NULL: nothing reported */

    /* Runtime. The listener (supervisor) alone touches threads until
     * dcm_server_stop() has joined it; the network is only read once
     * started. */
    DcmSharedSCPConfig config;
    std::unique_ptr<DcmTransportLayer> layer; /* outlives network */
    T_ASC_Network *network = NULL;
    std::thread listener;
    std::list<std::unique_ptr<dcm_association_thread>> threads;
    std::atomic<bool> stopping{false};
    /* Guards what follows; wake tells the supervisor to look again. */
    std::mutex mutex;
    std::condition_variable wake;
    bool need_acceptor = false;
    std::map<std::thread::id, dcm_negotiation> negotiations;
    std::map<std::string, unsigned> negotiating_per_address;
    /* Lines about refused or cut connections: at most one a second, so
     * that a peer reconnecting in a loop cannot flood the log. */
    std::mutex log_mutex;
    std::chrono::steady_clock::time_point last_peer_line;
    unsigned long suppressed_peer_lines = 0;
    bool started = false;
    std::atomic<unsigned long> next_association_id{0};
    std::atomic<unsigned long> accepted{0}, refused{0}, active{0};
    std::atomic<unsigned long> objects{0};
    std::atomic<uint64_t> memory_in_flight{0}; /* memory files, all */
};

/* The wall clock, seconds since the Unix epoch. */
static double dcm_wall_clock_seconds()
{
    struct timespec now;
    clock_gettime(CLOCK_REALTIME, &now);
    return static_cast<double>(now.tv_sec) + static_cast<double>(now.tv_nsec) / 1e9;
}

/* Trims the space padding DICOM puts around AE titles. */
static std::string dcm_trim(const char *text)
{
    std::string value(text != NULL ? text : "");
    size_t first = value.find_first_not_of(' ');
    size_t last = value.find_last_not_of(' ');
    return first == std::string::npos ? "" : value.substr(first, last - first + 1);
}

/* Whether a line about a refused or cut connection may be written now
 * (one a second); *suppressed receives how many were left out since the
 * last one written. */
static bool dcm_peer_line_allowed(dcm_server *server, unsigned long *suppressed)
{
    std::lock_guard<std::mutex> lock(server->log_mutex);
    auto now = std::chrono::steady_clock::now();
    if (now - server->last_peer_line < std::chrono::seconds(1)) {
        server->suppressed_peer_lines++;
        return false;
    }
    *suppressed = server->suppressed_peer_lines;
    server->suppressed_peer_lines = 0;
    server->last_peer_line = now;
    return true;
}

/* " (N similar lines left out)" or "". */
static std::string dcm_suppressed_note(unsigned long suppressed)
{
    return suppressed == 0
               ? std::string()
               : " (" + std::to_string(suppressed) + " similar line" +
                     (suppressed == 1 ? "" : "s") + " about peers left out in the last second)";
}

/* ------------------------------------------------------------------ */
/* One association                                                     */
/* ------------------------------------------------------------------ */

class dcm_association_scp : public DcmThreadSCP
{
  public:
    dcm_association_scp(dcm_server *server, unsigned long id) : server_(server), id_(id) {}

  protected:
    void notifyAssociationRequest(const T_ASC_Parameters &params,
                                  DcmSCPActionType &action) override;
    /* Contexts were accepted in notifyAssociationRequest(): a profile
     * holds only 128 abstract syntaxes in 3.6.7. */
    OFCondition negotiateAssociation() override { return EC_Normal; }
    /* The argument is the called address; the peer is checked together
     * with the calling AE title in checkCallingAETitleAccepted(). */
    OFBool checkCallingHostAccepted(const OFString &) override { return OFTrue; }
    OFBool checkCalledAETitleAccepted(const OFString &called) override;
    OFBool checkCallingAETitleAccepted(const OFString &calling) override;
    void refuseAssociation(const DcmRefuseReasonType reason) override;
    void notifyAssociationAcknowledge() override;
    void notifyReleaseRequest() override { outcome_ = "released"; }
    void notifyAbortRequest() override { outcome_ = "aborted (by the peer)"; }
    void notifyDIMSEError(const OFCondition &condition) override;
    void notifyAssociationTermination() override;
    OFCondition handleIncomingCommand(T_DIMSE_Message *message,
                                      const DcmPresentationContextInfo &context) override;
    void notifyRECEIVEProgress(const unsigned long byte_count) override;

  private:
    OFCondition receive_store(T_DIMSE_C_StoreRQ &request, T_ASC_PresentationContextID context_id);
    OFCondition refuse_store(T_DIMSE_C_StoreRQ &request, T_ASC_PresentationContextID context_id,
                             const char *reason);
    bool open_spool();

    dcm_server *server_;
    unsigned long id_;
    std::string calling_ae_, called_ae_, peer_ip_;
    unsigned long objects_ = 0;
    std::string outcome_ = "aborted (during negotiation)";
    /* One memory file per association, rewritten for each object: no
     * file is created, written or deleted on disk per object
     * (docs/performance.md). spool_ is its /proc/self/fd path. */
    int spool_fd_ = -1;
    std::string spool_;
    /* The object being received is being discarded as it arrives
     * (notifyRECEIVEProgress): past max_object_bytes (oversized_), or past
     * the server's memory budget while others were in flight (crowded_). */
    bool oversized_ = false;
    bool crowded_ = false;
    uint64_t counted_ = 0;  /* its bytes in server_->memory_in_flight */
    uint64_t reported_ = 0; /* its bytes reported as received (metrics) */
    /* Answers request with status, counting the answer. */
    OFCondition answer_store(T_DIMSE_C_StoreRQ &request, T_ASC_PresentationContextID context_id,
                             uint16_t status)
    {
        metrics_object_answered(server_->monitoring, status);
        return sendSTOREResponse(context_id, request, status);
    }
    void release_counted()
    {
        server_->memory_in_flight -= counted_;
        counted_ = 0;
    }

  public:
    ~dcm_association_scp() override
    {
        if (spool_fd_ >= 0)
            close(spool_fd_);
    }
};

void dcm_association_scp::notifyAssociationRequest(const T_ASC_Parameters &params,
                                                   DcmSCPActionType &action)
{
    calling_ae_ = dcm_trim(params.DULparams.callingAPTitle);
    called_ae_ = dcm_trim(params.DULparams.calledAPTitle);
    peer_ip_ = getPeerIP().c_str();
    /* DcmSCP hands the parameters as const, but accepting contexts is
     * exactly what this hook is for (a profile holds only 128 classes). */
    T_ASC_Parameters *writable = const_cast<T_ASC_Parameters *>(&params);
    OFCondition condition = ASC_acceptContextsWithPreferredTransferSyntaxes(
        writable, dcm_verification_class, 1,
        const_cast<const char **>(dcm_verification_transfer_syntaxes), 2);
    if (condition.good())
        condition = ASC_acceptContextsWithPreferredTransferSyntaxes(
            writable, dcmAllStorageSOPClassUIDs, numberOfDcmAllStorageSOPClassUIDs,
            const_cast<const char **>(dcm_storage_transfer_syntaxes),
            static_cast<int>(sizeof dcm_storage_transfer_syntaxes /
                             sizeof dcm_storage_transfer_syntaxes[0]));
    if (condition.bad()) {
        log_error("association %lu: accepting presentation contexts: %s", id_, condition.text());
        action = DCMSCP_ACTION_REFUSE_ASSOCIATION;
    }
}

OFBool dcm_association_scp::checkCalledAETitleAccepted(const OFString &called)
{
    if (dcm_trim(called.c_str()) == server_->ae_title)
        return OFTrue;
    log_warning("association refused: called AE '%s' from %s is not ours "
                "('%s')",
                dcm_trim(called.c_str()).c_str(), peer_ip_.c_str(), server_->ae_title.c_str());
    return OFFalse;
}

OFBool dcm_association_scp::checkCallingAETitleAccepted(const OFString &calling)
{
    if (!server_->have_allowlist)
        return OFTrue;
    std::string title = dcm_trim(calling.c_str());
    for (const auto &peer : server_->allowed_peers)
        if (peer.first == title && (peer.second.empty() || peer.second == peer_ip_))
            return OFTrue;
    log_warning("association refused: calling AE '%s' from %s is not in "
                "allowed_calling_ae_titles",
                title.c_str(), peer_ip_.c_str());
    return OFFalse;
}

void dcm_association_scp::refuseAssociation(const DcmRefuseReasonType reason)
{
    metrics_refusal counted = METRICS_REFUSAL_INTERNAL_ERROR;
    switch (reason) {
    case DCMSCP_CALLED_AE_TITLE_NOT_RECOGNIZED:
        outcome_ = "refused (called AE not recognized)";
        counted = METRICS_REFUSAL_CALLED_AE_TITLE;
        break;
    case DCMSCP_CALLING_AE_TITLE_NOT_RECOGNIZED:
        outcome_ = "refused (calling AE not recognized)";
        counted = METRICS_REFUSAL_CALLING_AE_TITLE;
        break;
    case DCMSCP_NO_PRESENTATION_CONTEXTS:
        outcome_ = "refused (no acceptable presentation contexts)";
        counted = METRICS_REFUSAL_NO_PRESENTATION_CONTEXT;
        break;
    case DCMSCP_BAD_APPLICATION_CONTEXT_NAME:
        outcome_ = "refused (bad application context name)";
        counted = METRICS_REFUSAL_APPLICATION_CONTEXT;
        break;
    case DCMSCP_TOO_MANY_ASSOCIATIONS:
        outcome_ = "refused (too many associations)";
        counted = METRICS_REFUSAL_TOO_MANY_ASSOCIATIONS;
        break;
    default: outcome_ = "refused (internal error)"; break;
    }
    server_->refused++;
    metrics_association_refused(server_->monitoring, counted);
    DcmThreadSCP::refuseAssociation(reason);
}

void dcm_association_scp::notifyAssociationAcknowledge()
{
    server_->accepted++;
    metrics_association_accepted(server_->monitoring);
    outcome_ = "aborted (no release)";
    log_debug("association %lu from AE '%s' (%s) accepted", id_, calling_ae_.c_str(),
              peer_ip_.c_str());
}

void dcm_association_scp::notifyDIMSEError(const OFCondition &condition)
{
    if (condition == DIMSE_NODATAAVAILABLE)
        outcome_ = "timed out";
    else
        outcome_ = std::string("aborted (") + condition.text() + ")";
}

void dcm_association_scp::notifyAssociationTermination()
{
    if (spool_fd_ >= 0) {
        close(spool_fd_);
        spool_fd_ = -1;
        spool_.clear();
    }
    log_info("association %lu from AE '%s' (%s): %lu object%s, %s", id_, calling_ae_.c_str(),
             peer_ip_.c_str(), objects_, objects_ == 1 ? "" : "s", outcome_.c_str());
}

/* Makes the association's memory file. The path goes through /proc so
 * that DCMTK, which writes received objects to a named file, can open it
 * (dcm_server_start checks once that this works). */
bool dcm_association_scp::open_spool()
{
    if (spool_fd_ >= 0)
        return true;
    spool_fd_ = memfd_create("mitilog-received", MFD_CLOEXEC);
    if (spool_fd_ < 0) {
        log_error("association %lu: cannot make a memory file: %s", id_, strerror(errno));
        return false;
    }
    spool_ = "/proc/self/fd/" + std::to_string(spool_fd_);
    return true;
}

/* Called by DCMTK after each data set fragment written to the memory
 * file, with the bytes received so far. Past max_object_bytes the file is
 * emptied after every fragment: DCMTK keeps writing at its offset, which
 * only leaves a hole, so the memory held stays within max_object_bytes
 * plus one fragment however long the object is. */
void dcm_association_scp::notifyRECEIVEProgress(const unsigned long byte_count)
{
    if (byte_count > reported_) {
        metrics_bytes_received(server_->monitoring, byte_count - reported_);
        reported_ = byte_count;
    }
    if (spool_fd_ < 0)
        return;
    if (!oversized_ && !crowded_) {
        /* The budget of all memory files together: an object that takes
         * the total past it while other objects are in flight is
         * discarded and answered A700 (retry later); one object alone may
         * always reach max_object_bytes. */
        uint64_t delta = byte_count - counted_;
        uint64_t total = (server_->memory_in_flight += delta);
        counted_ = byte_count;
        if (server_->max_object_bytes > 0 && byte_count > server_->max_object_bytes)
            oversized_ = true;
        else if (server_->max_memory_in_flight > 0 && total > server_->max_memory_in_flight &&
                 total > counted_)
            crowded_ = true;
        if (!oversized_ && !crowded_)
            return;
        release_counted();
    }
    if (ftruncate(spool_fd_, 0) != 0)
        log_warning("association %lu: cannot empty the memory file: %s", id_, strerror(errno));
}

/* Reads the data set into memory, drops it and answers A700. */
OFCondition dcm_association_scp::refuse_store(T_DIMSE_C_StoreRQ &request,
                                              T_ASC_PresentationContextID context_id,
                                              const char *reason)
{
    DcmDataset *dataset = NULL;
    reported_ = 0;
    OFCondition condition = receiveSTORERequest(request, context_id, dataset);
    delete dataset;
    if (condition.bad())
        return condition;
    metrics_object_received(server_->monitoring, dcm_wall_clock_seconds());
    log_warning("association %lu from AE '%s' (%s): object %s answered "
                "A700: %s",
                id_, calling_ae_.c_str(), peer_ip_.c_str(), request.AffectedSOPInstanceUID, reason);
    return answer_store(request, context_id, DCM_STATUS_OUT_OF_RESOURCES);
}

OFCondition dcm_association_scp::receive_store(T_DIMSE_C_StoreRQ &request,
                                               T_ASC_PresentationContextID context_id)
{
    if (!open_spool())
        return refuse_store(request, context_id, "no memory file to receive into");
    const std::string &path = spool_;
    oversized_ = crowded_ = false;
    reported_ = 0;
    OFCondition condition = receiveSTORERequest(request, context_id, OFString(path.c_str()));
    if (condition.bad()) {
        release_counted();
        log_warning("association %lu from AE '%s' (%s): receiving C-STORE "
                    "of %s failed: %s",
                    id_, calling_ae_.c_str(), peer_ip_.c_str(), request.AffectedSOPInstanceUID,
                    condition.text());
        if (ftruncate(spool_fd_, 0) != 0)
            log_warning("association %lu: cannot empty the memory file: %s", id_, strerror(errno));
        return condition; /* DCMTK aborts the association */
    }
    objects_++;
    server_->objects++;
    metrics_object_received(server_->monitoring, dcm_wall_clock_seconds());
    struct stat info;
    uint16_t status;
    if (oversized_ || (server_->max_object_bytes > 0 && fstat(spool_fd_, &info) == 0 &&
                       static_cast<uint64_t>(info.st_size) > server_->max_object_bytes)) {
        log_warning("association %lu from AE '%s' (%s): object %s refused "
                    "(0x%04X): larger than max_object_bytes %llu, discarded "
                    "as it arrived",
                    id_, calling_ae_.c_str(), peer_ip_.c_str(), request.AffectedSOPInstanceUID,
                    DCM_STATUS_TOO_LARGE,
                    static_cast<unsigned long long>(server_->max_object_bytes));
        status = DCM_STATUS_TOO_LARGE;
    } else if (crowded_) {
        log_warning("association %lu from AE '%s' (%s): object %s refused "
                    "(0x%04X): objects in flight passed "
                    "max_memory_in_flight_bytes %llu; discarded as it "
                    "arrived, the sender should retry",
                    id_, calling_ae_.c_str(), peer_ip_.c_str(), request.AffectedSOPInstanceUID,
                    DCM_STATUS_OUT_OF_RESOURCES,
                    static_cast<unsigned long long>(server_->max_memory_in_flight));
        status = DCM_STATUS_OUT_OF_RESOURCES;
    } else {
        dcm_received received;
        received.spool_path = path.c_str();
        received.calling_ae_title = calling_ae_.c_str();
        received.called_ae_title = called_ae_.c_str();
        received.peer_address = peer_ip_.c_str();
        received.affected_sop_class_uid = request.AffectedSOPClassUID;
        received.affected_sop_instance_uid = request.AffectedSOPInstanceUID;
        received.association_id = id_;
        status = server_->handler(server_->context, &received);
        log_debug("association %lu: object %lu, SOP instance %s (class %s), "
                  "status 0x%04X",
                  id_, objects_, request.AffectedSOPInstanceUID, request.AffectedSOPClassUID,
                  status);
    }
    /* The object is done with: give its memory back now rather than when
     * the next one arrives (a cine loop can be hundreds of MB). */
    if (ftruncate(spool_fd_, 0) != 0)
        log_warning("association %lu: cannot empty the memory file: %s", id_, strerror(errno));
    release_counted();
    return answer_store(request, context_id, status);
}

OFCondition dcm_association_scp::handleIncomingCommand(T_DIMSE_Message *message,
                                                       const DcmPresentationContextInfo &context)
{
    if (message->CommandField == DIMSE_C_FIND_RQ) {
        /* Negotiation refuses every Query/Retrieve context (only
         * Verification and storage classes are accepted); a C-FIND sent
         * on an accepted context anyway is answered with a refusal (PS3.7
         * Annex C: 0122 Refused: SOP Class not supported) instead of an abort. */
        T_DIMSE_C_FindRQ &request = message->msg.CFindRQ;
        T_ASC_PresentationContextID context_id = context.presentationContextID;
        DcmDataset *identifier = NULL;
        OFCondition condition = receiveDIMSEDataset(&context_id, &identifier);
        delete identifier;
        if (condition.bad())
            return condition;
        log_warning("association %lu from AE '%s' (%s): C-FIND on "
                    "presentation context %u refused (0x0122): this receiver "
                    "takes C-STORE and C-ECHO only",
                    id_, calling_ae_.c_str(), peer_ip_.c_str(), static_cast<unsigned>(context_id));
        return sendFINDResponse(context_id, request.MessageID, request.AffectedSOPClassUID, NULL,
                                STATUS_FIND_Refused_SOPClassNotSupported);
    }
    if (message->CommandField != DIMSE_C_STORE_RQ)
        return DcmThreadSCP::handleIncomingCommand(message, context);
    return receive_store(message->msg.CStoreRQ, context.presentationContextID);
}

/* ------------------------------------------------------------------ */
/* Negotiation: limits, deadline, first PDU checked                    */
/* ------------------------------------------------------------------ */

/* Largest A-ASSOCIATE-RQ read. 128 presentation contexts (PS3.8 9.3.2.2:
 * odd IDs 1-255) of a few hundred bytes each come to well under 64 KB;
 * the rest leaves room for user identity negotiation. */
enum { DCM_MAX_ASSOCIATE_RQ_BYTES = 1024 * 1024 };

static uint16_t dcm_big16(const unsigned char *p)
{
    return static_cast<uint16_t>((p[0] << 8) | p[1]);
}

/* Checks the item structure of an A-ASSOCIATE-RQ body (PS3.8 9.3.2: the
 * fixed 68 bytes, then items of type, reserved byte, 16-bit length).
 * DCMTK 3.6.7 parses it too, but loses memory on two malformed forms (a
 * presentation context without a transfer syntax, a UID sub-item longer
 * than its 64 bytes; docs/security.md): such a request is refused here,
 * before DCMTK sees it. Only framing, counts and lengths are checked;
 * DCMTK still interprets every value. */
static bool dcm_associate_rq_valid(const unsigned char *body, size_t length, std::string &reason)
{
    char text[160];
    if (length < 68) {
        reason = "A-ASSOCIATE-RQ shorter than its fixed fields";
        return false;
    }
    size_t offset = 68;
    while (offset < length) {
        if (length - offset < 4) {
            reason = "A-ASSOCIATE-RQ ends inside an item header";
            return false;
        }
        unsigned type = body[offset];
        size_t item_length = dcm_big16(body + offset + 2);
        if (item_length > length - offset - 4) {
            snprintf(text, sizeof text, "item 0x%02X overruns the A-ASSOCIATE-RQ", type);
            reason = text;
            return false;
        }
        const unsigned char *item = body + offset + 4;
        /* PS3.8 9.3.2.1: the application context name is a UID (PS3.5
         * 9.1: at most 64 bytes). */
        if (type == 0x10 && (item_length == 0 || item_length > 64)) {
            snprintf(text, sizeof text,
                     "application context name of %zu bytes (1 to 64 "
                     "allowed)",
                     item_length);
            reason = text;
            return false;
        }
        if (type == 0x20) {
            /* PS3.8 9.3.2.2: context ID and three reserved bytes, then
             * exactly one abstract syntax and one or more transfer
             * syntaxes, each a UID of at most 64 bytes. */
            unsigned id = item_length > 0 ? item[0] : 0;
            unsigned abstract = 0, transfer = 0;
            size_t sub = 4;
            if (item_length < 4) {
                reason = "presentation context item shorter than 4 bytes";
                return false;
            }
            while (sub < item_length) {
                if (item_length - sub < 4) {
                    snprintf(text, sizeof text,
                             "presentation context %u ends inside a "
                             "sub-item header",
                             id);
                    reason = text;
                    return false;
                }
                unsigned sub_type = item[sub];
                size_t sub_length = dcm_big16(item + sub + 2);
                if (sub_length > item_length - sub - 4) {
                    snprintf(text, sizeof text,
                             "presentation context %u: sub-item 0x%02X "
                             "overruns its item",
                             id, sub_type);
                    reason = text;
                    return false;
                }
                if ((sub_type == 0x30 || sub_type == 0x40) &&
                    (sub_length == 0 || sub_length > 64)) {
                    snprintf(text, sizeof text,
                             "presentation context %u: %s syntax of %zu "
                             "bytes (a UID has 1 to 64)",
                             id, sub_type == 0x30 ? "abstract" : "transfer", sub_length);
                    reason = text;
                    return false;
                }
                abstract += sub_type == 0x30;
                transfer += sub_type == 0x40;
                sub += 4 + sub_length;
            }
            if (abstract != 1 || transfer == 0) {
                snprintf(text, sizeof text,
                         "presentation context %u has %u abstract and %u "
                         "transfer syntaxes (exactly one and at least one "
                         "needed)",
                         id, abstract, transfer);
                reason = text;
                return false;
            }
        }
        offset += 4 + item_length;
    }
    return true;
}

/* Marks the calling thread's negotiation as refused: DCMTK 3.6.7 may
 * still return success from ASC_receiveAssociation() for a connection
 * closed before its request was read. */
static void dcm_negotiation_refused(dcm_server *server);

/* The connection DCMTK reads and writes through, around its own (plain
 * TCP or TLS): the first PDU is read whole and, when it is an
 * A-ASSOCIATE-RQ, checked by dcm_associate_rq_valid() before DCMTK gets
 * any of its bytes; everything else is passed through unchanged. */
class dcm_guarded_connection : public DcmTransportConnection
{
  public:
    dcm_guarded_connection(dcm_server *server, DcmNativeSocketType socket,
                           DcmTransportConnection *inner, const std::string &peer)
        : DcmTransportConnection(socket), server_(server), inner_(inner), peer_(peer)
    {
    }
    ~dcm_guarded_connection() override { delete inner_; }

    OFCondition serverSideHandshake() override { return inner_->serverSideHandshake(); }
    OFCondition clientSideHandshake() override { return inner_->clientSideHandshake(); }
    OFCondition renegotiate(const char *suite) override { return inner_->renegotiate(suite); }
    ssize_t read(void *buffer, size_t size) override;
    ssize_t write(void *buffer, size_t size) override { return inner_->write(buffer, size); }
    void close() override { inner_->close(); }
    void closeTransportConnection() override { inner_->closeTransportConnection(); }
    unsigned long getPeerCertificateLength() override { return inner_->getPeerCertificateLength(); }
    unsigned long getPeerCertificate(void *buffer, unsigned long size) override
    {
        return inner_->getPeerCertificate(buffer, size);
    }
    OFBool networkDataAvailable(int timeout) override
    {
        if (offset_ < first_.size())
            return OFTrue;
        return inner_->networkDataAvailable(timeout);
    }
    OFBool isTransparentConnection() override { return inner_->isTransparentConnection(); }
    OFString &dumpConnectionParameters(OFString &text) override
    {
        return inner_->dumpConnectionParameters(text);
    }

  private:
    bool read_exactly(unsigned char *buffer, size_t size);
    bool read_first_pdu();
    bool incomplete();

    dcm_server *server_;
    DcmTransportConnection *inner_;
    std::string peer_;
    bool first_read_ = false;
    std::vector<unsigned char> first_; /* the first PDU, until passed on */
    size_t offset_ = 0;
};

/* The peer closed, or was cut at the deadline, before its first PDU was
 * whole. */
bool dcm_guarded_connection::incomplete()
{
    unsigned long suppressed = 0;
    if (dcm_peer_line_allowed(server_, &suppressed))
        log_info("connection from %s closed before its association request "
                 "was complete%s",
                 peer_.c_str(), dcm_suppressed_note(suppressed).c_str());
    first_.clear();
    dcm_negotiation_refused(server_);
    return false;
}

bool dcm_guarded_connection::read_exactly(unsigned char *buffer, size_t size)
{
    size_t done = 0;
    while (done < size) {
        ssize_t got = inner_->read(buffer + done, size - done);
        if (got < 0 && errno == EINTR)
            continue;
        if (got <= 0)
            return false;
        done += static_cast<size_t>(got);
    }
    return true;
}

bool dcm_guarded_connection::read_first_pdu()
{
    unsigned char header[6];
    if (!read_exactly(header, sizeof header))
        return incomplete();
    first_.assign(header, header + sizeof header);
    if (header[0] != 0x01) /* not an A-ASSOCIATE-RQ: DCMTK answers it */
        return true;
    size_t length = (static_cast<size_t>(header[2]) << 24) |
                    (static_cast<size_t>(header[3]) << 16) | (static_cast<size_t>(header[4]) << 8) |
                    header[5];
    std::string reason;
    if (length > DCM_MAX_ASSOCIATE_RQ_BYTES) {
        reason = "A-ASSOCIATE-RQ of " + std::to_string(length) + " bytes (at most " +
                 std::to_string(DCM_MAX_ASSOCIATE_RQ_BYTES) + " read)";
    } else {
        first_.resize(sizeof header + length);
        if (!read_exactly(first_.data() + sizeof header, length))
            return incomplete();
        if (dcm_associate_rq_valid(first_.data() + sizeof header, length, reason))
            return true;
    }
    /* PS3.8 9.3.8: A-ABORT, source service provider (2), reason invalid
     * PDU parameter value (6). */
    unsigned char abort_pdu[10] = {0x07, 0, 0, 0, 0, 4, 0, 0, 2, 6};
    (void)inner_->write(abort_pdu, sizeof abort_pdu);
    unsigned long suppressed = 0;
    if (dcm_peer_line_allowed(server_, &suppressed))
        log_warning("association request from %s refused (A-ABORT): %s%s", peer_.c_str(),
                    reason.c_str(), dcm_suppressed_note(suppressed).c_str());
    metrics_association_refused(server_->monitoring, METRICS_REFUSAL_INVALID_REQUEST);
    first_.clear();
    dcm_negotiation_refused(server_);
    return false;
}

ssize_t dcm_guarded_connection::read(void *buffer, size_t size)
{
    if (!first_read_) {
        first_read_ = true;
        if (!read_first_pdu()) {
            errno = ECONNRESET;
            return -1;
        }
    }
    if (offset_ < first_.size()) {
        size_t count = std::min(size, first_.size() - offset_);
        memcpy(buffer, first_.data() + offset_, count);
        offset_ += count;
        if (offset_ == first_.size()) {
            std::vector<unsigned char>().swap(first_);
            offset_ = 0;
        }
        return static_cast<ssize_t>(count);
    }
    return inner_->read(buffer, size);
}

/* Registers the connection DCMTK has just accepted on the calling
 * thread, or says why it must be closed unread. */
static bool dcm_negotiation_begin(dcm_server *server, DcmNativeSocketType socket,
                                  std::string &peer);

/* A transport layer (plain or TLS) whose connections are counted,
 * limited, given a deadline and wrapped in dcm_guarded_connection. DCMTK
 * calls createConnection() right after accept(), before any byte is read
 * or the TLS handshake starts. */
template <class Layer> class dcm_guarded_layer : public Layer
{
  public:
    template <class... Arguments>
    explicit dcm_guarded_layer(dcm_server *server, Arguments &&...arguments)
        : Layer(std::forward<Arguments>(arguments)...), server_(server)
    {
    }
    DcmTransportConnection *createConnection(DcmNativeSocketType socket, OFBool secure) override
    {
        std::string peer;
        if (!dcm_negotiation_begin(server_, socket, peer))
            return NULL; /* DCMTK closes the socket */
        DcmTransportConnection *inner = Layer::createConnection(socket, secure);
        if (inner == NULL)
            return NULL;
        dcm_guarded_connection *guarded =
            new (std::nothrow) dcm_guarded_connection(server_, socket, inner, peer);
        return guarded != NULL ? static_cast<DcmTransportConnection *>(guarded) : inner;
    }

  private:
    dcm_server *server_;
};

static bool dcm_negotiation_begin(dcm_server *server, DcmNativeSocketType socket, std::string &peer)
{
    struct sockaddr_storage address;
    socklen_t size = sizeof address;
    char text[INET6_ADDRSTRLEN] = "?";
    memset(&address, 0, sizeof address);
    if (getpeername(socket, reinterpret_cast<struct sockaddr *>(&address), &size) == 0) {
        if (address.ss_family == AF_INET)
            inet_ntop(AF_INET, &reinterpret_cast<struct sockaddr_in *>(&address)->sin_addr, text,
                      sizeof text);
        else if (address.ss_family == AF_INET6)
            inet_ntop(AF_INET6, &reinterpret_cast<struct sockaddr_in6 *>(&address)->sin6_addr, text,
                      sizeof text);
    }
    peer = text;
    if (server->stopping) {
        /* The stop's own wake-up connection (dcm_server_wake_acceptor), or
         * a peer arriving as the server stops: closed unread, not counted
         * as a refusal. */
        log_debug("connection from %s closed unread: the server is stopping", peer.c_str());
        return false;
    }
    const char *refusal = NULL;
    unsigned limit = 0;
    try {
        std::lock_guard<std::mutex> lock(server->mutex);
        unsigned &from_peer = server->negotiating_per_address[peer];
        if (server->stopping) {
            refusal = "the server is stopping";
        } else if (server->negotiations.size() >= server->max_negotiations) {
            refusal = "max_negotiations";
            limit = server->max_negotiations;
        } else if (from_peer >= server->max_negotiations_per_address) {
            refusal = "max_negotiations_per_address";
            limit = server->max_negotiations_per_address;
        } else {
            int watch = fcntl(socket, F_DUPFD_CLOEXEC, 0);
            if (watch < 0) {
                refusal = "no file descriptor left";
            } else {
                dcm_negotiation &entry = server->negotiations[std::this_thread::get_id()];
                entry.peer = peer;
                entry.watch_fd = watch;
                entry.deadline =
                    std::chrono::steady_clock::now() + std::chrono::seconds(server->acse_timeout);
                from_peer++;
                server->need_acceptor = true;
                server->wake.notify_all();
            }
        }
        if (refusal != NULL && from_peer == 0)
            server->negotiating_per_address.erase(peer);
    } catch (...) {
        refusal = "out of memory";
    }
    if (refusal == NULL)
        return true;
    server->refused++;
    metrics_association_refused(server->monitoring, limit > 0 ? METRICS_REFUSAL_NEGOTIATION_LIMIT
                                                              : METRICS_REFUSAL_INTERNAL_ERROR);
    unsigned long suppressed = 0;
    if (!dcm_peer_line_allowed(server, &suppressed))
        return false;
    if (limit > 0)
        log_warning("connection from %s closed unread: %u connections are "
                    "negotiating already (%s)%s",
                    peer.c_str(), limit, refusal, dcm_suppressed_note(suppressed).c_str());
    else
        log_warning("connection from %s closed unread: %s%s", peer.c_str(), refusal,
                    dcm_suppressed_note(suppressed).c_str());
    return false;
}

static void dcm_negotiation_refused(dcm_server *server)
{
    std::lock_guard<std::mutex> lock(server->mutex);
    auto entry = server->negotiations.find(std::this_thread::get_id());
    if (entry != server->negotiations.end())
        entry->second.refused = true;
}

/* Ends the calling thread's negotiation, if it had one: true when this
 * thread's connection had been accepted (the thread now owns it).
 * expired: closed at its deadline or refused (both already logged). */
static bool dcm_negotiation_end(dcm_server *server, std::string &peer, bool &expired)
{
    std::lock_guard<std::mutex> lock(server->mutex);
    auto entry = server->negotiations.find(std::this_thread::get_id());
    if (entry == server->negotiations.end())
        return false;
    peer = entry->second.peer;
    expired = entry->second.expired || entry->second.refused;
    close(entry->second.watch_fd);
    auto count = server->negotiating_per_address.find(peer);
    if (count != server->negotiating_per_address.end() && --count->second == 0)
        server->negotiating_per_address.erase(count);
    server->negotiations.erase(entry);
    return true;
}

/* Closes (shutdown(2) through the duplicate descriptor, so that blocked
 * reads return at once) every negotiation past its deadline, or all of
 * them when stopping. Called with server->mutex held. */
static void dcm_negotiation_watch(dcm_server *server, bool all)
{
    auto now = std::chrono::steady_clock::now();
    for (auto &entry : server->negotiations) {
        dcm_negotiation &negotiation = entry.second;
        if (negotiation.expired || (!all && now < negotiation.deadline))
            continue;
        negotiation.expired = true;
        if (!all)
            metrics_association_refused(server->monitoring, METRICS_REFUSAL_REQUEST_TIMEOUT);
        /* The line first: once the socket is shut down, the connection's
         * own thread wakes and would take the line allowance with its
         * vaguer "closed before ... complete". */
        unsigned long suppressed = 0;
        if (!all && dcm_peer_line_allowed(server, &suppressed))
            log_warning("connection from %s closed: association request "
                        "not complete after %u s (acse_timeout_seconds)%s",
                        negotiation.peer.c_str(), server->acse_timeout,
                        dcm_suppressed_note(suppressed).c_str());
        shutdown(negotiation.watch_fd, SHUT_RDWR);
    }
}

/* ------------------------------------------------------------------ */
/* Connection threads                                                  */
/* ------------------------------------------------------------------ */

static void dcm_reject_and_drop(T_ASC_Association *assoc, T_ASC_RejectParameters *reject)
{
    if (reject != NULL)
        ASC_rejectAssociation(assoc, reject);
    ASC_dropAssociation(assoc);
    ASC_destroyAssociation(&assoc);
}

static void dcm_refuse_busy(dcm_server *server, T_ASC_Association *assoc, unsigned long id)
{
    T_ASC_RejectParameters reject;
    reject.result = ASC_RESULT_REJECTEDTRANSIENT;
    reject.source = ASC_SOURCE_SERVICEPROVIDER_PRESENTATION_RELATED;
    reject.reason = ASC_REASON_SP_PRES_LOCALLIMITEXCEEDED;
    server->refused++;
    metrics_association_refused(server->monitoring, METRICS_REFUSAL_TOO_MANY_ASSOCIATIONS);
    log_warning("association %lu from AE '%s' (%s): 0 objects, refused "
                "(too many associations: %u in progress)",
                id, dcm_trim(assoc->params->DULparams.callingAPTitle).c_str(),
                assoc->params->DULparams.callingPresentationAddress, server->max_associations);
    dcm_reject_and_drop(assoc, &reject);
}

/* Runs one negotiated association on the calling thread. */
static void dcm_association_serve(dcm_server *server, T_ASC_Association *assoc)
{
    unsigned long id = ++server->next_association_id;
    if (server->active.fetch_add(1) >= server->max_associations) {
        server->active--;
        dcm_refuse_busy(server, assoc, id);
        return;
    }
    try {
        dcm_association_scp scp(server, id);
        OFCondition condition = scp.setSharedConfig(server->config);
        if (condition.good()) {
            /* From here the scp owns assoc; its destructor drops it. */
            condition = scp.run(assoc);
            assoc = NULL;
        }
        if (condition.bad())
            log_error("association %lu: %s", id, condition.text());
    } catch (...) {
        mitilog_error error;
        dcm_error_from_exception(&error, MITILOG_ERROR_IO, "association");
        log_error("association %lu: %s", id, error.text);
    }
    if (assoc != NULL) {
        ASC_dropAssociation(assoc);
        ASC_destroyAssociation(&assoc);
    }
    server->active--;
}

/* A connection thread: waits for a connection (the only thread doing
 * so); once DCMTK has accepted one (dcm_negotiation_begin), the
 * supervisor starts the next waiting thread and this one reads the
 * request (and TLS handshake) and serves the association. The listening
 * socket is thus never held by a slow peer. */
static void dcm_connection_run(dcm_server *server, dcm_association_thread *self)
{
    try {
        while (!server->stopping) {
            T_ASC_Association *assoc = NULL;
            OFCondition condition =
                ASC_receiveAssociation(server->network, &assoc, static_cast<long>(server->max_pdu),
                                       NULL, NULL, server->tls ? OFTrue : OFFalse, DUL_NOBLOCK, 1);
            std::string peer;
            bool expired = false;
            if (!dcm_negotiation_end(server, peer, expired)) {
                /* No connection, or one closed unread (already logged). */
                if (assoc != NULL)
                    dcm_reject_and_drop(assoc, NULL);
                if (condition.bad() && condition != DUL_NOASSOCIATIONREQUEST && !server->stopping)
                    log_debug("connection not accepted: %s", condition.text());
                continue;
            }
            if (condition.bad() || expired) {
                if (!expired)
                    log_warning("association request from %s not received: "
                                "%s",
                                peer.c_str(), condition.text());
                if (assoc != NULL)
                    dcm_reject_and_drop(assoc, NULL);
                break;
            }
            dcm_association_serve(server, assoc);
            break;
        }
    } catch (...) {
        mitilog_error error;
        dcm_error_from_exception(&error, MITILOG_ERROR_IO, "connection");
        log_error("DICOM connection thread: %s", error.text);
    }
    self->finished = true;
    std::lock_guard<std::mutex> lock(server->mutex);
    server->wake.notify_all();
}

static void dcm_reap_threads(dcm_server *server, bool all)
{
    for (auto entry = server->threads.begin(); entry != server->threads.end();) {
        if (all || (*entry)->finished) {
            (*entry)->thread.join();
            entry = server->threads.erase(entry);
        } else {
            ++entry;
        }
    }
}

static bool dcm_spawn_connection_thread(dcm_server *server)
{
    try {
        std::unique_ptr<dcm_association_thread> entry(new dcm_association_thread);
        dcm_association_thread *self = entry.get();
        server->threads.push_back(std::move(entry));
        try {
            self->thread = std::thread(dcm_connection_run, server, self);
        } catch (...) {
            server->threads.pop_back();
            throw;
        }
        return true;
    } catch (...) {
        mitilog_error error;
        dcm_error_from_exception(&error, MITILOG_ERROR_MEMORY, "thread");
        log_error("DICOM listener: cannot start a thread: %s", error.text);
        return false;
    }
}

/* The supervisor: keeps one thread waiting for a connection, closes
 * negotiations past their deadline, joins finished threads. It alone
 * touches server->threads. */
static void dcm_supervise(dcm_server *server)
{
    std::unique_lock<std::mutex> lock(server->mutex);
    server->need_acceptor = true;
    while (!server->stopping) {
        if (server->need_acceptor) {
            server->need_acceptor = false;
            lock.unlock();
            bool started = dcm_spawn_connection_thread(server);
            lock.lock();
            if (!started) {
                server->need_acceptor = true;
                server->wake.wait_for(lock, std::chrono::milliseconds(200));
            }
            continue;
        }
        dcm_negotiation_watch(server, false);
        lock.unlock();
        dcm_reap_threads(server, false);
        lock.lock();
        if (!server->need_acceptor && !server->stopping)
            server->wake.wait_for(lock, std::chrono::milliseconds(100));
    }
    dcm_negotiation_watch(server, true);
    lock.unlock();
    /* Let associations in flight finish: they still get responses. */
    dcm_reap_threads(server, true);
}

static void dcm_listen_guarded(dcm_server *server)
{
    try {
        dcm_supervise(server);
    } catch (...) {
        mitilog_error error;
        dcm_error_from_exception(&error, MITILOG_ERROR_IO, "listener");
        log_error("DICOM listener on port %u stopped: %s", server->port, error.text);
        server->stopping = true;
        dcm_reap_threads(server, true);
    }
}

/* ------------------------------------------------------------------ */
/* C API                                                               */
/* ------------------------------------------------------------------ */

static bool dcm_is_set(const char *text) { return text != NULL && text[0] != '\0'; }

mitilog_status dcm_server_create(const dcm_server_settings *settings, dcm_store_handler handler,
                                 void *context, dcm_server **out, mitilog_error *error)
{
    if (settings == NULL || handler == NULL || out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_server_create: NULL argument");
    *out = NULL;
    std::string ae_title = dcm_trim(settings->ae_title);
    if (ae_title.empty() || ae_title.size() > 16)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "AE title '%s' must have 1 to 16 characters", ae_title.c_str());
    if (settings->port > 65535)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "port %u out of range",
                                 settings->port);
    bool certificate = dcm_is_set(settings->tls_certificate_file);
    bool key = dcm_is_set(settings->tls_private_key_file);
    if (certificate != key || (dcm_is_set(settings->tls_ca_file) && !certificate))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "TLS needs both a certificate and a private "
                                 "key file (and both for a CA file)");
    try {
        std::unique_ptr<dcm_server> server(new dcm_server);
        server->ae_title = ae_title;
        server->port = settings->port;
        server->have_allowlist = settings->allowed_peers != NULL;
        for (size_t i = 0; server->have_allowlist && i < settings->allowed_peer_count; i++) {
            const dcm_allowed_peer *peer = &settings->allowed_peers[i];
            server->allowed_peers.emplace_back(dcm_trim(peer->ae_title),
                                               dcm_is_set(peer->address) ? peer->address : "");
        }
        server->max_associations = settings->max_associations > 0 ? settings->max_associations : 1;
        if (settings->max_negotiations > 0)
            server->max_negotiations = settings->max_negotiations;
        if (settings->max_negotiations_per_address > 0)
            server->max_negotiations_per_address = settings->max_negotiations_per_address;
        if (settings->acse_timeout_seconds > 0)
            server->acse_timeout = settings->acse_timeout_seconds;
        uint32_t pdu = settings->max_pdu > 0 ? settings->max_pdu : ASC_DEFAULTMAXPDU;
        server->max_pdu = pdu < ASC_MINIMUMPDUSIZE   ? ASC_MINIMUMPDUSIZE
                          : pdu > ASC_MAXIMUMPDUSIZE ? ASC_MAXIMUMPDUSIZE
                                                     : pdu;
        server->max_object_bytes = settings->max_object_bytes;
        server->max_memory_in_flight = settings->max_memory_in_flight_bytes;
        server->tls = certificate;
        if (certificate) {
            server->tls_certificate_file = settings->tls_certificate_file;
            server->tls_private_key_file = settings->tls_private_key_file;
        }
        server->tls_require_client = dcm_is_set(settings->tls_ca_file);
        if (server->tls_require_client)
            server->tls_ca_file = settings->tls_ca_file;
        server->handler = handler;
        server->context = context;
        server->monitoring = settings->metrics;

        DcmSCPConfig &config = *server->config;
        config.setAETitle(server->ae_title.c_str());
        config.setPort(static_cast<Uint16>(server->port));
        config.setMaxReceivePDULength(server->max_pdu);
        config.setACSETimeout(server->acse_timeout);
        config.setDIMSEBlockingMode(DIMSE_NONBLOCKING);
        config.setDIMSETimeout(settings->dimse_timeout_seconds > 0
                                   ? settings->dimse_timeout_seconds
                                   : unsigned{DCM_DEFAULT_DIMSE_TIMEOUT});
        config.setConnectionBlockingMode(DUL_NOBLOCK);
        config.setConnectionTimeout(1);
        config.setHostLookupEnabled(OFFalse);
        *out = server.release();
        return MITILOG_OK;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_INVALID, "dcm_server_create")
}

static mitilog_status dcm_tls_check(mitilog_error *error, const char *what,
                                    const OFCondition &condition)
{
    return condition.good()
               ? MITILOG_OK
               : dcm_error_from_condition(error, MITILOG_ERROR_INVALID, what, condition);
}

/* BCP 195 profile; with a CA file the peer must show a certificate that
 * CA signed, otherwise client certificates are not asked for. */
static mitilog_status dcm_tls_setup(dcm_server *server, mitilog_error *error)
{
    DcmTLSTransportLayer *layer = new dcm_guarded_layer<DcmTLSTransportLayer>(
        server, NET_ACCEPTOR, static_cast<const char *>(NULL), OFTrue);
    server->layer.reset(layer);
    DcmTLSTransportLayer &tls = *layer;
    mitilog_status status =
        dcm_tls_check(error, "TLS profile BCP 195", tls.setTLSProfile(TSP_Profile_BCP195));
    if (status == MITILOG_OK)
        status = dcm_tls_check(
            error, server->tls_private_key_file.c_str(),
            tls.setPrivateKeyFile(server->tls_private_key_file.c_str(), DCF_Filetype_PEM));
    if (status == MITILOG_OK)
        status = dcm_tls_check(
            error, server->tls_certificate_file.c_str(),
            tls.setCertificateFile(server->tls_certificate_file.c_str(), DCF_Filetype_PEM));
    if (status == MITILOG_OK && !tls.checkPrivateKeyMatchesCertificate())
        status = mitilog_error_set(
            error, MITILOG_ERROR_INVALID, "TLS private key %s does not match certificate %s",
            server->tls_private_key_file.c_str(), server->tls_certificate_file.c_str());
    if (status == MITILOG_OK)
        status = dcm_tls_check(error, "TLS cipher suites", tls.activateCipherSuites());
    if (status == MITILOG_OK && server->tls_require_client) {
        status = dcm_tls_check(
            error, server->tls_ca_file.c_str(),
            tls.addTrustedCertificateFile(server->tls_ca_file.c_str(), DCF_Filetype_PEM));
        tls.setCertificateVerification(DCV_requireCertificate);
    } else if (status == MITILOG_OK) {
        tls.setCertificateVerification(DCV_ignoreCertificate);
    }
    if (status == MITILOG_OK)
        status = dcm_tls_check(error, "TLS transport layer",
                               ASC_setTransportLayer(server->network, &tls, 0));
    return status;
}

/* Received objects go to memory files opened by their /proc/self/fd
 * path (dcm_association_scp::open_spool): checks once, at start, that
 * this works here (it needs /proc). */
static mitilog_status dcm_check_memory_files(mitilog_error *error)
{
    int fd = memfd_create("mitilog-check", MFD_CLOEXEC);
    if (fd < 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "memfd_create: %s", strerror(errno));
    std::string path = "/proc/self/fd/" + std::to_string(fd);
    FILE *file = fopen(path.c_str(), "wb");
    int saved = errno;
    if (file != NULL)
        fclose(file);
    close(fd);
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "cannot open a memory file as %s (is /proc "
                                 "mounted?): %s",
                                 path.c_str(), strerror(saved));
    return MITILOG_OK;
}

mitilog_status dcm_server_start(dcm_server *server, mitilog_error *error)
{
    if (server == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_server_start: NULL server");
    if (server->started)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "DICOM server already started");
    try {
        dcmDisableGethostbyaddr.set(OFTrue); /* no reverse DNS per peer */
        mitilog_status checked = dcm_check_memory_files(error);
        if (checked != MITILOG_OK)
            return checked;
        errno = 0;
        OFCondition condition =
            ASC_initializeNetwork(NET_ACCEPTOR, static_cast<int>(server->port),
                                  static_cast<int>(server->acse_timeout), &server->network);
        if (condition.bad()) {
            /* DCMTK's text usually carries strerror() already. */
            const char *reason = errno != 0 ? strerror(errno) : "";
            bool known = reason[0] == '\0' || strstr(condition.text(), reason);
            server->network = NULL;
            return mitilog_error_set(error, MITILOG_ERROR_IO, "DICOM port %u: %s%s%s", server->port,
                                     condition.text(), known ? "" : ": ", known ? "" : reason);
        }
        mitilog_status status = MITILOG_OK;
        if (server->tls) {
            status = dcm_tls_setup(server, error);
        } else {
            server->layer.reset(new dcm_guarded_layer<DcmTransportLayer>(server));
            status = dcm_tls_check(error, "transport layer",
                                   ASC_setTransportLayer(server->network, server->layer.get(), 0));
        }
        if (status != MITILOG_OK) {
            ASC_dropNetwork(&server->network);
            server->layer.reset();
            return status;
        }
        server->stopping = false;
        server->listener = std::thread(dcm_listen_guarded, server);
        server->started = true;
        log_info("DICOM server '%s' listening on port %u%s "
                 "(max_associations %u; negotiating at most %u, %u per "
                 "address, %u s each)",
                 server->ae_title.c_str(), server->port, server->tls ? " with TLS" : "",
                 server->max_associations, server->max_negotiations,
                 server->max_negotiations_per_address, server->acse_timeout);
        return MITILOG_OK;
    } catch (...) {
        if (server->network != NULL)
            ASC_dropNetwork(&server->network);
        return dcm_error_from_exception(error, MITILOG_ERROR_IO, "dcm_server_start");
    }
}

/* The thread waiting for a connection looks at server->stopping only
 * between waits of up to a second (DCMTK's timeout is in whole seconds);
 * a connection of our own to the listening port ends its wait at once,
 * and dcm_negotiation_begin closes it unread. If it cannot be made, the
 * wait simply runs out. */
static void dcm_server_wake_acceptor(dcm_server *server)
{
    int wake = socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
    if (wake < 0)
        return;
    struct sockaddr_in address;
    memset(&address, 0, sizeof address);
    address.sin_family = AF_INET;
    address.sin_port = htons(static_cast<uint16_t>(server->port));
    address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    if (connect(wake, reinterpret_cast<struct sockaddr *>(&address), sizeof address) != 0)
        log_debug("DICOM server: waking the listener: %s", strerror(errno));
    close(wake);
}

void dcm_server_stop(dcm_server *server)
{
    if (server == NULL || !server->started)
        return;
    {
        std::lock_guard<std::mutex> lock(server->mutex);
        server->stopping = true;
        server->wake.notify_all();
    }
    dcm_server_wake_acceptor(server);
    try {
        server->listener.join(); /* joins the association threads too */
    } catch (...) {
        log_error("DICOM server: joining the listener failed");
    }
    if (server->network != NULL)
        ASC_dropNetwork(&server->network);
    server->started = false;
    log_info("DICOM server '%s' on port %u stopped", server->ae_title.c_str(), server->port);
}

void dcm_server_free(dcm_server *server)
{
    if (server == NULL)
        return;
    dcm_server_stop(server);
    delete server; /* after the network: the TLS layer goes last */
}

void dcm_server_get_counters(dcm_server *server, dcm_server_counters *out)
{
    if (out == NULL)
        return;
    memset(out, 0, sizeof *out);
    if (server == NULL)
        return;
    out->associations_accepted = server->accepted;
    out->associations_refused = server->refused;
    out->associations_active = server->active;
    out->objects_received = server->objects;
}

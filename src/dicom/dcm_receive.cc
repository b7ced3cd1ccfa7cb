/*
 * dcm_receive.cc - the Storage SCP (with Verification): an accept loop of
 * our own on a listener thread, one thread per association running a
 * DcmThreadSCP subclass (dcmtk-notes.md, approach (b)). Each C-STORE is
 * written byte for byte to the association's memory file and handed to
 * the C handler, whose status is the C-STORE response.
 */
#include "dicom/dcm_internal.h"

#include "dcmtk/dcmdata/dcuid.h"
#include "dcmtk/dcmnet/assoc.h"
#include "dcmtk/dcmnet/dul.h"
#include "dcmtk/dcmnet/scpthrd.h"
#include "dcmtk/dcmtls/tlslayer.h"

extern "C" {
#include "util/log.h"
}

#include <atomic>
#include <cstdio>
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

enum { DCM_DEFAULT_ACSE_TIMEOUT = 5, DCM_DEFAULT_DIMSE_TIMEOUT = 30 };

struct dcm_association_thread {
    std::thread thread;
    std::atomic<bool> finished{false};
};

struct dcm_server {
    /* Settings, copied. */
    std::string ae_title;
    unsigned port = 0;
    bool have_allowlist = false;
    std::vector<std::pair<std::string, std::string>> allowed_peers;
    unsigned max_associations = 1;
    unsigned acse_timeout = DCM_DEFAULT_ACSE_TIMEOUT;
    uint32_t max_pdu = ASC_DEFAULTMAXPDU;
    uint64_t max_object_bytes = 0; /* 0 = no limit */
    std::string tls_certificate_file, tls_private_key_file, tls_ca_file;
    bool tls = false, tls_require_client = false;
    dcm_store_handler handler = NULL;
    void *context = NULL;

    /* Runtime. The listener alone touches network and threads until
     * dcm_server_stop() has joined it. */
    DcmSharedSCPConfig config;
    std::unique_ptr<DcmTLSTransportLayer> tls_layer; /* outlives network */
    T_ASC_Network *network = NULL;
    std::thread listener;
    std::list<std::unique_ptr<dcm_association_thread>> threads;
    std::atomic<bool> stopping{false};
    bool started = false;
    std::atomic<unsigned long> next_association_id{0};
    std::atomic<unsigned long> accepted{0}, refused{0}, active{0};
    std::atomic<unsigned long> objects{0};
};

/* Trims the space padding DICOM puts around AE titles. */
static std::string dcm_trim(const char *text)
{
    std::string value(text != NULL ? text : "");
    size_t first = value.find_first_not_of(' ');
    size_t last = value.find_last_not_of(' ');
    return first == std::string::npos ? ""
                                      : value.substr(first, last - first + 1);
}

/* ------------------------------------------------------------------ */
/* One association                                                     */
/* ------------------------------------------------------------------ */

class dcm_association_scp : public DcmThreadSCP
{
  public:
    dcm_association_scp(dcm_server *server, unsigned long id)
        : server_(server), id_(id)
    {
    }

  protected:
    void notifyAssociationRequest(const T_ASC_Parameters &params,
                                  DcmSCPActionType &action) override;
    /* Contexts were accepted in notifyAssociationRequest(): a profile
     * holds only 128 abstract syntaxes in 3.6.7. */
    OFCondition negotiateAssociation() override { return EC_Normal; }
    /* The argument is the called address; the peer is checked together
     * with the calling AE title in checkCallingAETitleAccepted(). */
    OFBool checkCallingHostAccepted(const OFString &) override
    {
        return OFTrue;
    }
    OFBool checkCalledAETitleAccepted(const OFString &called) override;
    OFBool checkCallingAETitleAccepted(const OFString &calling) override;
    void refuseAssociation(const DcmRefuseReasonType reason) override;
    void notifyAssociationAcknowledge() override;
    void notifyReleaseRequest() override { outcome_ = "released"; }
    void notifyAbortRequest() override { outcome_ = "aborted (by the peer)"; }
    void notifyDIMSEError(const OFCondition &condition) override;
    void notifyAssociationTermination() override;
    OFCondition
    handleIncomingCommand(T_DIMSE_Message *message,
                          const DcmPresentationContextInfo &context) override;

  private:
    OFCondition receive_store(T_DIMSE_C_StoreRQ &request,
                              T_ASC_PresentationContextID context_id);
    OFCondition refuse_store(T_DIMSE_C_StoreRQ &request,
                             T_ASC_PresentationContextID context_id,
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

  public:
    ~dcm_association_scp() override
    {
        if (spool_fd_ >= 0)
            close(spool_fd_);
    }
};

void dcm_association_scp::notifyAssociationRequest(
    const T_ASC_Parameters &params, DcmSCPActionType &action)
{
    calling_ae_ = dcm_trim(params.DULparams.callingAPTitle);
    called_ae_ = dcm_trim(params.DULparams.calledAPTitle);
    peer_ip_ = getPeerIP().c_str();
    /* DcmSCP hands the parameters as const, but accepting contexts is
     * exactly what this hook is for (see dcmtk-notes.md). */
    T_ASC_Parameters *writable = const_cast<T_ASC_Parameters *>(&params);
    OFCondition condition = ASC_acceptContextsWithPreferredTransferSyntaxes(
        writable, dcm_verification_class, 1,
        const_cast<const char **>(dcm_verification_transfer_syntaxes), 2);
    if (condition.good())
        condition = ASC_acceptContextsWithPreferredTransferSyntaxes(
            writable, dcmAllStorageSOPClassUIDs,
            numberOfDcmAllStorageSOPClassUIDs,
            const_cast<const char **>(dcm_storage_transfer_syntaxes),
            static_cast<int>(sizeof dcm_storage_transfer_syntaxes /
                             sizeof dcm_storage_transfer_syntaxes[0]));
    if (condition.bad()) {
        log_error("association %lu: accepting presentation contexts: %s", id_,
                  condition.text());
        action = DCMSCP_ACTION_REFUSE_ASSOCIATION;
    }
}

OFBool dcm_association_scp::checkCalledAETitleAccepted(const OFString &called)
{
    if (dcm_trim(called.c_str()) == server_->ae_title)
        return OFTrue;
    log_warning("association refused: called AE '%s' from %s is not ours "
                "('%s')",
                dcm_trim(called.c_str()).c_str(), peer_ip_.c_str(),
                server_->ae_title.c_str());
    return OFFalse;
}

OFBool dcm_association_scp::checkCallingAETitleAccepted(const OFString &calling)
{
    if (!server_->have_allowlist)
        return OFTrue;
    std::string title = dcm_trim(calling.c_str());
    for (const auto &peer : server_->allowed_peers)
        if (peer.first == title &&
            (peer.second.empty() || peer.second == peer_ip_))
            return OFTrue;
    log_warning("association refused: calling AE '%s' from %s is not in "
                "allowed_calling_ae_titles",
                title.c_str(), peer_ip_.c_str());
    return OFFalse;
}

void dcm_association_scp::refuseAssociation(const DcmRefuseReasonType reason)
{
    switch (reason) {
    case DCMSCP_CALLED_AE_TITLE_NOT_RECOGNIZED:
        outcome_ = "refused (called AE not recognized)";
        break;
    case DCMSCP_CALLING_AE_TITLE_NOT_RECOGNIZED:
        outcome_ = "refused (calling AE not recognized)";
        break;
    case DCMSCP_NO_PRESENTATION_CONTEXTS:
        outcome_ = "refused (no acceptable presentation contexts)";
        break;
    case DCMSCP_BAD_APPLICATION_CONTEXT_NAME:
        outcome_ = "refused (bad application context name)";
        break;
    case DCMSCP_TOO_MANY_ASSOCIATIONS:
        outcome_ = "refused (too many associations)";
        break;
    default:
        outcome_ = "refused (internal error)";
        break;
    }
    server_->refused++;
    DcmThreadSCP::refuseAssociation(reason);
}

void dcm_association_scp::notifyAssociationAcknowledge()
{
    server_->accepted++;
    outcome_ = "aborted (no release)";
    log_debug("association %lu from AE '%s' (%s) accepted", id_,
              calling_ae_.c_str(), peer_ip_.c_str());
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
    log_info("association %lu from AE '%s' (%s): %lu object%s, %s", id_,
             calling_ae_.c_str(), peer_ip_.c_str(), objects_,
             objects_ == 1 ? "" : "s", outcome_.c_str());
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
        log_error("association %lu: cannot make a memory file: %s", id_,
                  strerror(errno));
        return false;
    }
    spool_ = "/proc/self/fd/" + std::to_string(spool_fd_);
    return true;
}

/* Reads the data set into memory, drops it and answers A700. */
OFCondition
dcm_association_scp::refuse_store(T_DIMSE_C_StoreRQ &request,
                                  T_ASC_PresentationContextID context_id,
                                  const char *reason)
{
    DcmDataset *dataset = NULL;
    OFCondition condition =
        receiveSTORERequest(request, context_id, dataset);
    delete dataset;
    if (condition.bad())
        return condition;
    log_warning("association %lu from AE '%s' (%s): object %s answered "
                "A700: %s",
                id_, calling_ae_.c_str(), peer_ip_.c_str(),
                request.AffectedSOPInstanceUID, reason);
    return sendSTOREResponse(context_id, request,
                             DCM_STATUS_OUT_OF_RESOURCES);
}

OFCondition
dcm_association_scp::receive_store(T_DIMSE_C_StoreRQ &request,
                                   T_ASC_PresentationContextID context_id)
{
    if (!open_spool())
        return refuse_store(request, context_id, "no memory file to receive into");
    const std::string &path = spool_;
    OFCondition condition =
        receiveSTORERequest(request, context_id, OFString(path.c_str()));
    if (condition.bad()) {
        log_warning("association %lu from AE '%s' (%s): receiving C-STORE "
                    "of %s failed: %s",
                    id_, calling_ae_.c_str(), peer_ip_.c_str(),
                    request.AffectedSOPInstanceUID, condition.text());
        if (ftruncate(spool_fd_, 0) != 0)
            log_warning("association %lu: cannot empty the memory file: %s",
                        id_, strerror(errno));
        return condition; /* DCMTK aborts the association */
    }
    objects_++;
    server_->objects++;
    struct stat info;
    uint16_t status;
    if (server_->max_object_bytes > 0 && fstat(spool_fd_, &info) == 0 &&
        static_cast<uint64_t>(info.st_size) > server_->max_object_bytes) {
        log_warning("association %lu from AE '%s' (%s): object %s refused "
                    "(0x%04X): %lld bytes exceed max_object_bytes %llu",
                    id_, calling_ae_.c_str(), peer_ip_.c_str(),
                    request.AffectedSOPInstanceUID, DCM_STATUS_TOO_LARGE,
                    static_cast<long long>(info.st_size),
                    static_cast<unsigned long long>(server_->max_object_bytes));
        status = DCM_STATUS_TOO_LARGE;
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
                  id_, objects_, request.AffectedSOPInstanceUID,
                  request.AffectedSOPClassUID, status);
    }
    /* The object is done with: give its memory back now rather than when
     * the next one arrives (a cine loop can be hundreds of MB). */
    if (ftruncate(spool_fd_, 0) != 0)
        log_warning("association %lu: cannot empty the memory file: %s", id_,
                    strerror(errno));
    return sendSTOREResponse(context_id, request, status);
}

OFCondition dcm_association_scp::handleIncomingCommand(
    T_DIMSE_Message *message, const DcmPresentationContextInfo &context)
{
    if (message->CommandField != DIMSE_C_STORE_RQ)
        return DcmThreadSCP::handleIncomingCommand(message, context);
    return receive_store(message->msg.CStoreRQ, context.presentationContextID);
}

/* ------------------------------------------------------------------ */
/* Listener                                                            */
/* ------------------------------------------------------------------ */

static void dcm_association_run(dcm_server *server, T_ASC_Association *assoc,
                                unsigned long id, dcm_association_thread *self)
{
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
    self->finished = true;
}

static void dcm_reject_and_drop(T_ASC_Association *assoc,
                                T_ASC_RejectParameters *reject)
{
    if (reject != NULL)
        ASC_rejectAssociation(assoc, reject);
    ASC_dropAssociation(assoc);
    ASC_destroyAssociation(&assoc);
}

static void dcm_refuse_busy(dcm_server *server, T_ASC_Association *assoc,
                            unsigned long id)
{
    T_ASC_RejectParameters reject;
    reject.result = ASC_RESULT_REJECTEDTRANSIENT;
    reject.source = ASC_SOURCE_SERVICEPROVIDER_PRESENTATION_RELATED;
    reject.reason = ASC_REASON_SP_PRES_LOCALLIMITEXCEEDED;
    server->refused++;
    log_warning("association %lu from AE '%s' (%s): 0 objects, refused "
                "(too many associations: %u in progress)",
                id, dcm_trim(assoc->params->DULparams.callingAPTitle).c_str(),
                assoc->params->DULparams.callingPresentationAddress,
                server->max_associations);
    dcm_reject_and_drop(assoc, &reject);
}

static void dcm_reap_threads(dcm_server *server, bool all)
{
    for (auto entry = server->threads.begin();
         entry != server->threads.end();) {
        if (all || (*entry)->finished) {
            (*entry)->thread.join();
            entry = server->threads.erase(entry);
        } else {
            ++entry;
        }
    }
}

static void dcm_accept_one(dcm_server *server, T_ASC_Association *assoc)
{
    unsigned long id = ++server->next_association_id;
    if (server->active >= server->max_associations) {
        dcm_refuse_busy(server, assoc, id);
        return;
    }
    try {
        std::unique_ptr<dcm_association_thread> entry(
            new dcm_association_thread);
        dcm_association_thread *self = entry.get();
        server->threads.push_back(std::move(entry));
        server->active++;
        try {
            self->thread =
                std::thread(dcm_association_run, server, assoc, id, self);
        } catch (...) {
            server->threads.pop_back();
            server->active--;
            throw;
        }
    } catch (...) {
        mitilog_error error;
        dcm_error_from_exception(&error, MITILOG_ERROR_MEMORY, "thread");
        log_error("association %lu: cannot start a thread: %s", id, error.text);
        T_ASC_RejectParameters reject;
        reject.result = ASC_RESULT_REJECTEDTRANSIENT;
        reject.source = ASC_SOURCE_SERVICEPROVIDER_PRESENTATION_RELATED;
        reject.reason = ASC_REASON_SP_PRES_LOCALLIMITEXCEEDED;
        server->refused++;
        dcm_reject_and_drop(assoc, &reject);
    }
}

static void dcm_listen(dcm_server *server)
{
    while (!server->stopping) {
        dcm_reap_threads(server, false);
        T_ASC_Association *assoc = NULL;
        /* Waits at most 1 s for a connection so the stop flag is seen;
         * reading the A-ASSOCIATE-RQ (and the TLS handshake) is bounded
         * by the ACSE timeout given to ASC_initializeNetwork(). */
        OFCondition condition = ASC_receiveAssociation(
            server->network, &assoc, static_cast<long>(server->max_pdu), NULL,
            NULL, server->tls ? OFTrue : OFFalse, DUL_NOBLOCK, 1);
        if (condition == DUL_NOASSOCIATIONREQUEST) {
            if (assoc != NULL)
                dcm_reject_and_drop(assoc, NULL);
            continue;
        }
        if (condition.bad()) {
            const char *peer =
                assoc != NULL && assoc->params != NULL
                    ? assoc->params->DULparams.callingPresentationAddress
                    : "?";
            log_warning("association request from %s not received: %s", peer,
                        condition.text());
            if (assoc != NULL)
                dcm_reject_and_drop(assoc, NULL);
            continue;
        }
        dcm_accept_one(server, assoc);
    }
    /* Let associations in flight finish: they still get responses. */
    dcm_reap_threads(server, true);
}

static void dcm_listen_guarded(dcm_server *server)
{
    try {
        dcm_listen(server);
    } catch (...) {
        mitilog_error error;
        dcm_error_from_exception(&error, MITILOG_ERROR_IO, "listener");
        log_error("DICOM listener on port %u stopped: %s", server->port,
                  error.text);
        dcm_reap_threads(server, true);
    }
}

/* ------------------------------------------------------------------ */
/* C API                                                               */
/* ------------------------------------------------------------------ */

static bool dcm_is_set(const char *text)
{
    return text != NULL && text[0] != '\0';
}

mitilog_status dcm_server_create(const dcm_server_settings *settings,
                                 dcm_store_handler handler, void *context,
                                 dcm_server **out, mitilog_error *error)
{
    if (settings == NULL || handler == NULL || out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "dcm_server_create: NULL argument");
    *out = NULL;
    std::string ae_title = dcm_trim(settings->ae_title);
    if (ae_title.empty() || ae_title.size() > 16)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "AE title '%s' must have 1 to 16 characters",
                                 ae_title.c_str());
    if (settings->port > 65535)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "port %u out of range", settings->port);
    bool certificate = dcm_is_set(settings->tls_certificate_file);
    bool key = dcm_is_set(settings->tls_private_key_file);
    if (certificate != key ||
        (dcm_is_set(settings->tls_ca_file) && !certificate))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "TLS needs both a certificate and a private "
                                 "key file (and both for a CA file)");
    try {
        std::unique_ptr<dcm_server> server(new dcm_server);
        server->ae_title = ae_title;
        server->port = settings->port;
        server->have_allowlist = settings->allowed_peers != NULL;
        for (size_t i = 0;
             server->have_allowlist && i < settings->allowed_peer_count; i++) {
            const dcm_allowed_peer *peer = &settings->allowed_peers[i];
            server->allowed_peers.emplace_back(
                dcm_trim(peer->ae_title),
                dcm_is_set(peer->address) ? peer->address : "");
        }
        server->max_associations =
            settings->max_associations > 0 ? settings->max_associations : 1;
        if (settings->acse_timeout_seconds > 0)
            server->acse_timeout = settings->acse_timeout_seconds;
        uint32_t pdu =
            settings->max_pdu > 0 ? settings->max_pdu : ASC_DEFAULTMAXPDU;
        server->max_pdu = pdu < ASC_MINIMUMPDUSIZE   ? ASC_MINIMUMPDUSIZE
                          : pdu > ASC_MAXIMUMPDUSIZE ? ASC_MAXIMUMPDUSIZE
                                                     : pdu;
        server->max_object_bytes = settings->max_object_bytes;
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
               : dcm_error_from_condition(error, MITILOG_ERROR_INVALID, what,
                                          condition);
}

/* BCP 195 profile; with a CA file the peer must show a certificate that
 * CA signed, otherwise client certificates are not asked for. */
static mitilog_status dcm_tls_setup(dcm_server *server, mitilog_error *error)
{
    server->tls_layer.reset(
        new DcmTLSTransportLayer(NET_ACCEPTOR, NULL, OFTrue));
    DcmTLSTransportLayer &tls = *server->tls_layer;
    mitilog_status status = dcm_tls_check(
        error, "TLS profile BCP 195", tls.setTLSProfile(TSP_Profile_BCP195));
    if (status == MITILOG_OK)
        status = dcm_tls_check(
            error, server->tls_private_key_file.c_str(),
            tls.setPrivateKeyFile(server->tls_private_key_file.c_str(),
                                  DCF_Filetype_PEM));
    if (status == MITILOG_OK)
        status = dcm_tls_check(
            error, server->tls_certificate_file.c_str(),
            tls.setCertificateFile(server->tls_certificate_file.c_str(),
                                   DCF_Filetype_PEM));
    if (status == MITILOG_OK && !tls.checkPrivateKeyMatchesCertificate())
        status = mitilog_error_set(
            error, MITILOG_ERROR_INVALID,
            "TLS private key %s does not match certificate %s",
            server->tls_private_key_file.c_str(),
            server->tls_certificate_file.c_str());
    if (status == MITILOG_OK)
        status = dcm_tls_check(error, "TLS cipher suites",
                               tls.activateCipherSuites());
    if (status == MITILOG_OK && server->tls_require_client) {
        status =
            dcm_tls_check(error, server->tls_ca_file.c_str(),
                          tls.addTrustedCertificateFile(
                              server->tls_ca_file.c_str(), DCF_Filetype_PEM));
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
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "memfd_create: %s", strerror(errno));
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
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "dcm_server_start: NULL server");
    if (server->started)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "DICOM server already started");
    try {
        dcmDisableGethostbyaddr.set(OFTrue); /* no reverse DNS per peer */
        mitilog_status checked = dcm_check_memory_files(error);
        if (checked != MITILOG_OK)
            return checked;
        errno = 0;
        OFCondition condition = ASC_initializeNetwork(
            NET_ACCEPTOR, static_cast<int>(server->port),
            static_cast<int>(server->acse_timeout), &server->network);
        if (condition.bad()) {
            /* DCMTK's text usually carries strerror() already. */
            const char *reason = errno != 0 ? strerror(errno) : "";
            bool known = reason[0] == '\0' || strstr(condition.text(), reason);
            server->network = NULL;
            return mitilog_error_set(
                error, MITILOG_ERROR_IO, "DICOM port %u: %s%s%s", server->port,
                condition.text(), known ? "" : ": ", known ? "" : reason);
        }
        mitilog_status status =
            server->tls ? dcm_tls_setup(server, error) : MITILOG_OK;
        if (status != MITILOG_OK) {
            ASC_dropNetwork(&server->network);
            server->tls_layer.reset();
            return status;
        }
        server->stopping = false;
        server->listener = std::thread(dcm_listen_guarded, server);
        server->started = true;
        log_info("DICOM server '%s' listening on port %u%s "
                 "(max_associations %u)",
                 server->ae_title.c_str(), server->port,
                 server->tls ? " with TLS" : "", server->max_associations);
        return MITILOG_OK;
    } catch (...) {
        if (server->network != NULL)
            ASC_dropNetwork(&server->network);
        return dcm_error_from_exception(error, MITILOG_ERROR_IO,
                                        "dcm_server_start");
    }
}

void dcm_server_stop(dcm_server *server)
{
    if (server == NULL || !server->started)
        return;
    server->stopping = true;
    try {
        server->listener.join(); /* joins the association threads too */
    } catch (...) {
        log_error("DICOM server: joining the listener failed");
    }
    if (server->network != NULL)
        ASC_dropNetwork(&server->network);
    server->started = false;
    log_info("DICOM server '%s' on port %u stopped", server->ae_title.c_str(),
             server->port);
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

/*
 * dcm_retrieve.cc - the Query/Retrieve SCU (dcm_retrieve.h) on DCMTK's
 * DcmSCU: Study Root C-FIND, C-GET with the storage sub-operations
 * received on the same association (PS3.4 C.4.3), C-MOVE to another AE
 * (PS3.4 C.4.2).
 */
#include "dicom/dcm_internal.h"
#include "dicom/dcm_retrieve.h"

#include "dcmtk/dcmdata/dcdeftag.h"
#include "dcmtk/dcmdata/dcfilefo.h"
#include "dcmtk/dcmdata/dcuid.h"
#include "dcmtk/dcmnet/diutil.h"
#include "dcmtk/dcmnet/scu.h"

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <new>
#include <string>
#include <vector>

#include <sys/mman.h>
#include <unistd.h>

/* The storage classes of an ultrasound study, accepted in the SCP role
 * for C-GET (PS3.4 C.4.3: the SCU proposes the storage classes it will
 * receive, with SCP role selection, PS3.7 D.3.3.4). */
static const char *const dcm_retrieve_storage_classes[] = {
    UID_UltrasoundImageStorage,
    UID_UltrasoundMultiframeImageStorage,
    UID_EnhancedUSVolumeStorage,
    UID_SecondaryCaptureImageStorage,
    UID_MultiframeTrueColorSecondaryCaptureImageStorage,
    UID_ComprehensiveSRStorage,
    UID_EnhancedSRStorage,
    UID_BasicTextSRStorage,
    UID_Comprehensive3DSRStorage,
};

/* Encapsulated transfer syntaxes proposed one per presentation context,
 * so that the PACS can send a compressed object as it is stored (a
 * context accepts one transfer syntax, PS3.8 section 9.3.2.2). */
static const char *const dcm_retrieve_encapsulated_syntaxes[] = {
    UID_JPEGProcess1TransferSyntax,
    UID_JPEGProcess2_4TransferSyntax,
    UID_JPEGProcess14SV1TransferSyntax,
    UID_JPEGLSLosslessTransferSyntax,
    UID_JPEGLSLossyTransferSyntax,
    UID_JPEG2000LosslessOnlyTransferSyntax,
    UID_JPEG2000TransferSyntax,
    UID_RLELosslessTransferSyntax,
    UID_DeflatedExplicitVRLittleEndianTransferSyntax,
};

namespace
{

class RetrieveSCU : public DcmSCU
{
  public:
    RetrieveSCU(dcm_retrieved_handler handler, void *context)
        : handler_(handler), context_(context), spool_fd_(-1)
    {
    }
    ~RetrieveSCU() override
    {
        if (spool_fd_ >= 0)
            close(spool_fd_);
    }

    bool open_spool()
    {
        spool_fd_ = memfd_create("mitilog-retrieved", MFD_CLOEXEC);
        if (spool_fd_ < 0)
            return false;
        snprintf(spool_path_, sizeof spool_path_, "/proc/self/fd/%d", spool_fd_);
        return true;
    }

    /* Every C-STORE sub-operation of a C-GET: written to the memory file
     * as a Part 10 file in the transfer syntax it arrived in, handed to
     * the handler, answered with the handler's status. */
    OFCondition handleSTORERequest(const T_ASC_PresentationContextID presID,
                                   DcmDataset *incomingObject, OFBool &continueCGETSession,
                                   Uint16 &cStoreReturnStatus) override
    {
        (void)presID;
        continueCGETSession = OFTrue;
        cStoreReturnStatus = STATUS_STORE_Refused_OutOfResources;
        if (incomingObject == NULL)
            return EC_IllegalParameter;
        try {
            OFString sop_class, sop_instance;
            incomingObject->findAndGetOFString(DCM_SOPClassUID, sop_class);
            incomingObject->findAndGetOFString(DCM_SOPInstanceUID, sop_instance);
            E_TransferSyntax xfer = incomingObject->getOriginalXfer();
            if (xfer == EXS_Unknown)
                xfer = EXS_LittleEndianExplicit;
            /* The file takes the data set over (no copy of its pixels). */
            DcmFileFormat file(incomingObject, OFFalse);
            incomingObject = NULL;
            if (ftruncate(spool_fd_, 0) != 0) {
                return EC_Normal; /* answered A700: the PACS may retry */
            }
            OFCondition saved = file.saveFile(spool_path_, xfer);
            if (saved.bad()) {
                cStoreReturnStatus = STATUS_STORE_Error_CannotUnderstand;
                return EC_Normal;
            }
            dcm_retrieved object = {spool_path_, sop_class.c_str(), sop_instance.c_str()};
            cStoreReturnStatus = handler_ != NULL ? handler_(context_, &object)
                                                  : STATUS_STORE_Refused_OutOfResources;
            if (ftruncate(spool_fd_, 0) != 0) {
                /* the next object's write truncates it anyway */
            }
        } catch (...) {
            delete incomingObject;
            cStoreReturnStatus = STATUS_STORE_Refused_OutOfResources;
        }
        return EC_Normal;
    }

  private:
    dcm_retrieved_handler handler_;
    void *context_;
    int spool_fd_;
    char spool_path_[64];
};

} // namespace

struct dcm_association {
    RetrieveSCU *scu;
    dcm_retrieve_method method;
    T_ASC_PresentationContextID find_context;
    T_ASC_PresentationContextID retrieve_context;
    char peer[256]; /* "AE@HOST:PORT" for messages */
};

static mitilog_status dcm_retrieve_add_contexts(RetrieveSCU *scu, dcm_retrieve_method method)
{
    OFList<OFString> uncompressed;
    uncompressed.push_back(UID_LittleEndianExplicitTransferSyntax);
    uncompressed.push_back(UID_BigEndianExplicitTransferSyntax);
    uncompressed.push_back(UID_LittleEndianImplicitTransferSyntax);
    OFList<OFString> little_endian;
    little_endian.push_back(UID_LittleEndianExplicitTransferSyntax);
    little_endian.push_back(UID_LittleEndianImplicitTransferSyntax);
    scu->addPresentationContext(UID_FINDStudyRootQueryRetrieveInformationModel, little_endian);
    if (method == DCM_RETRIEVE_MOVE) {
        scu->addPresentationContext(UID_MOVEStudyRootQueryRetrieveInformationModel, little_endian);
        return MITILOG_OK;
    }
    scu->addPresentationContext(UID_GETStudyRootQueryRetrieveInformationModel, little_endian);
    for (const char *sop_class : dcm_retrieve_storage_classes) {
        scu->addPresentationContext(sop_class, uncompressed, ASC_SC_ROLE_SCP);
        for (const char *syntax : dcm_retrieve_encapsulated_syntaxes) {
            OFList<OFString> one;
            one.push_back(syntax);
            scu->addPresentationContext(sop_class, one, ASC_SC_ROLE_SCP);
        }
    }
    return MITILOG_OK;
}

extern "C" mitilog_status dcm_association_open(const dcm_peer *peer, dcm_retrieve_method method,
                                               dcm_retrieved_handler handler, void *context,
                                               dcm_association **out, mitilog_error *error)
{
    *out = NULL;
    dcm_association *association = NULL;
    try {
        association = new dcm_association();
        association->scu = NULL;
        association->method = method;
        snprintf(association->peer, sizeof association->peer, "%s@%s:%u", peer->called_ae_title,
                 peer->host, peer->port);
        RetrieveSCU *scu = new RetrieveSCU(handler, context);
        association->scu = scu;
        if (method == DCM_RETRIEVE_GET && !scu->open_spool()) {
            mitilog_status status = mitilog_error_set(
                error, MITILOG_ERROR_IO, "cannot make a memory file for retrieved objects: %s",
                strerror(errno));
            dcm_association_close(association);
            return status;
        }
        scu->setAETitle(peer->calling_ae_title);
        scu->setPeerAETitle(peer->called_ae_title);
        scu->setPeerHostName(peer->host);
        scu->setPeerPort((Uint16)peer->port);
        scu->setMaxReceivePDULength(peer->max_pdu);
        scu->setConnectionTimeout((Sint32)peer->connect_timeout_seconds);
        scu->setACSETimeout(peer->connect_timeout_seconds);
        scu->setDIMSEBlockingMode(DIMSE_NONBLOCKING);
        scu->setDIMSETimeout(peer->dimse_timeout_seconds);
        scu->setVerbosePCMode(OFFalse);
        dcm_retrieve_add_contexts(scu, method);
        OFCondition condition = scu->initNetwork();
        if (condition.bad()) {
            mitilog_status status = dcm_error_from_condition(
                error, MITILOG_ERROR_IO, "cannot set up the network for the PACS", condition);
            dcm_association_close(association);
            return status;
        }
        condition = scu->negotiateAssociation();
        if (condition == DUL_ASSOCIATIONREJECTED) {
            mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                              "the PACS %s refused the association: check that it knows "
                              "mitilog's AE title '%s' with this machine's address, and the "
                              "PACS's AE title",
                              association->peer, peer->calling_ae_title);
            dcm_association_close(association);
            return MITILOG_ERROR_REFUSED;
        }
        if (condition == NET_EC_NoAcceptablePresentationContexts) {
            mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                              "the PACS %s accepted the association but none of the services "
                              "asked for (Study Root Query/Retrieve FIND and %s): check that it "
                              "offers them to mitilog's AE title '%s'",
                              association->peer, method == DCM_RETRIEVE_GET ? "GET" : "MOVE",
                              peer->calling_ae_title);
            dcm_association_close(association);
            return MITILOG_ERROR_REFUSED;
        }
        if (condition.bad()) {
            char what[400];
            snprintf(what, sizeof what,
                     "cannot reach the PACS %s (check the host name and port, that the PACS is "
                     "running and that it lets this machine connect)",
                     association->peer);
            mitilog_status status =
                dcm_error_from_condition(error, MITILOG_ERROR_IO, what, condition);
            dcm_association_close(association);
            return status;
        }
        association->find_context =
            scu->findPresentationContextID(UID_FINDStudyRootQueryRetrieveInformationModel, "");
        association->retrieve_context = scu->findPresentationContextID(
            method == DCM_RETRIEVE_GET ? UID_GETStudyRootQueryRetrieveInformationModel
                                       : UID_MOVEStudyRootQueryRetrieveInformationModel,
            "");
        if (association->find_context == 0 || association->retrieve_context == 0) {
            mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                              "the PACS %s does not offer Study Root %s to mitilog's AE title "
                              "'%s': ask its administrator to allow it%s",
                              association->peer,
                              association->find_context == 0 ? "C-FIND"
                              : method == DCM_RETRIEVE_GET   ? "C-GET"
                                                             : "C-MOVE",
                              peer->calling_ae_title,
                              method == DCM_RETRIEVE_GET && association->retrieve_context == 0
                                  ? ", or use --retrieve move"
                                  : "");
            dcm_association_close(association);
            return MITILOG_ERROR_REFUSED;
        }
        *out = association;
        return MITILOG_OK;
    } catch (...) {
        if (association != NULL)
            dcm_association_close(association);
        return dcm_error_from_exception(error, MITILOG_ERROR_MEMORY, "open an association");
    }
}

extern "C" void dcm_association_close(dcm_association *association)
{
    if (association == NULL)
        return;
    try {
        if (association->scu != NULL) {
            if (association->scu->isConnected() && association->scu->releaseAssociation().bad())
                association->scu->abortAssociation();
            delete association->scu;
        }
    } catch (...) {
        /* nothing more can be done about a failed release */
    }
    delete association;
}

/* A copy of the string value of tag in dataset, or NULL when absent. */
static char *dcm_retrieve_value(DcmDataset *dataset, const DcmTagKey &tag)
{
    OFString value;
    if (dataset == NULL || dataset->findAndGetOFStringArray(tag, value).bad())
        return NULL;
    return dcm_string_copy(value.c_str());
}

/* Sends a C-FIND, checks the final status and hands each pending
 * response's identifier to take(). */
template <typename Take>
static mitilog_status dcm_retrieve_find(dcm_association *association, DcmDataset *keys,
                                        const char *what, Take take, mitilog_error *error)
{
    OFList<QRResponse *> responses;
    OFCondition condition =
        association->scu->sendFINDRequest(association->find_context, keys, &responses);
    mitilog_status status = MITILOG_OK;
    if (condition.bad()) {
        char text[400];
        snprintf(text, sizeof text,
                 "the C-FIND (%s) to the PACS %s failed (the association was lost or timed out)",
                 what, association->peer);
        status = dcm_error_from_condition(error, MITILOG_ERROR_IO, text, condition);
    }
    Uint16 final_status = 0;
    bool have_final = false;
    for (QRResponse *response : responses) {
        if (status == MITILOG_OK && DICOM_PENDING_STATUS(response->m_status)) {
            if (response->m_dataset != NULL)
                status = take(response->m_dataset, error);
        } else if (!DICOM_PENDING_STATUS(response->m_status)) {
            final_status = response->m_status;
            have_final = true;
        }
        delete response;
    }
    if (status == MITILOG_OK && have_final && final_status != STATUS_Success)
        status = mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                   "the PACS %s answered the C-FIND (%s) with status 0x%04X (%s): "
                                   "check the query (dates, filters) and the PACS's log",
                                   association->peer, what, final_status,
                                   DU_cfindStatusString(final_status));
    return status;
}

static void dcm_study_match_clear(dcm_study_match *match)
{
    free(match->study_instance_uid);
    free(match->study_date);
    free(match->accession_number);
    free(match->study_description);
    free(match->modalities_in_study);
}

extern "C" mitilog_status dcm_association_find_studies(dcm_association *association,
                                                       const dcm_study_query *query,
                                                       dcm_study_match **matches, size_t *count,
                                                       mitilog_error *error)
{
    *matches = NULL;
    *count = 0;
    std::vector<dcm_study_match> found;
    try {
        DcmDataset keys;
        std::string range = std::string(query->date_from) + "-" + query->date_to;
        keys.putAndInsertString(DCM_QueryRetrieveLevel, "STUDY");
        keys.putAndInsertString(DCM_StudyInstanceUID, "");
        keys.putAndInsertString(DCM_StudyDate, range.c_str());
        keys.putAndInsertString(DCM_StudyTime, "");
        keys.putAndInsertString(DCM_AccessionNumber, "");
        keys.putAndInsertString(DCM_ModalitiesInStudy,
                                query->modality != NULL ? query->modality : "");
        keys.putAndInsertString(DCM_StudyDescription,
                                query->study_description != NULL ? query->study_description : "");
        keys.putAndInsertString(DCM_NumberOfStudyRelatedInstances, "");
        mitilog_status status = dcm_retrieve_find(
            association, &keys, "studies",
            [&found](DcmDataset *identifier, mitilog_error *) {
                dcm_study_match match = {};
                match.instance_count = -1;
                found.push_back(match);
                dcm_study_match &m = found.back();
                m.study_instance_uid = dcm_retrieve_value(identifier, DCM_StudyInstanceUID);
                m.study_date = dcm_retrieve_value(identifier, DCM_StudyDate);
                m.accession_number = dcm_retrieve_value(identifier, DCM_AccessionNumber);
                m.study_description = dcm_retrieve_value(identifier, DCM_StudyDescription);
                m.modalities_in_study = dcm_retrieve_value(identifier, DCM_ModalitiesInStudy);
                char *instances = dcm_retrieve_value(identifier, DCM_NumberOfStudyRelatedInstances);
                if (instances != NULL && instances[0] != '\0')
                    m.instance_count = strtol(instances, NULL, 10);
                free(instances);
                return MITILOG_OK;
            },
            error);
        if (status != MITILOG_OK) {
            for (dcm_study_match &m : found)
                dcm_study_match_clear(&m);
            return status;
        }
        dcm_study_match *out = (dcm_study_match *)calloc(found.size() + 1, sizeof *out);
        if (out == NULL)
            throw std::bad_alloc();
        if (!found.empty())
            memcpy(out, found.data(), found.size() * sizeof *out);
        *matches = out;
        *count = found.size();
        return MITILOG_OK;
    } catch (...) {
        for (dcm_study_match &m : found)
            dcm_study_match_clear(&m);
        return dcm_error_from_exception(error, MITILOG_ERROR_MEMORY, "C-FIND studies");
    }
}

extern "C" void dcm_study_matches_free(dcm_study_match *matches, size_t count)
{
    if (matches == NULL)
        return;
    for (size_t i = 0; i < count; i++)
        dcm_study_match_clear(&matches[i]);
    free(matches);
}

extern "C" mitilog_status dcm_association_study_modalities(dcm_association *association,
                                                           const char *study_instance_uid,
                                                           char **modalities, mitilog_error *error)
{
    *modalities = NULL;
    try {
        std::string joined;
        DcmDataset keys;
        keys.putAndInsertString(DCM_QueryRetrieveLevel, "SERIES");
        keys.putAndInsertString(DCM_StudyInstanceUID, study_instance_uid);
        keys.putAndInsertString(DCM_SeriesInstanceUID, "");
        keys.putAndInsertString(DCM_Modality, "");
        mitilog_status status = dcm_retrieve_find(
            association, &keys, "series of a study",
            [&joined](DcmDataset *identifier, mitilog_error *) {
                OFString modality;
                if (identifier->findAndGetOFString(DCM_Modality, modality).good() &&
                    !modality.empty()) {
                    std::string wrapped = "\\" + joined + "\\";
                    if (wrapped.find("\\" + std::string(modality.c_str()) + "\\") ==
                        std::string::npos)
                        joined += (joined.empty() ? "" : "\\") + std::string(modality.c_str());
                }
                return MITILOG_OK;
            },
            error);
        if (status == MITILOG_OK)
            *modalities = dcm_string_copy(joined.c_str());
        return status;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_MEMORY, "C-FIND series")
}

extern "C" mitilog_status dcm_association_find_instances(dcm_association *association,
                                                         const char *study_instance_uid,
                                                         dcm_instance_match **matches,
                                                         size_t *count, mitilog_error *error)
{
    *matches = NULL;
    *count = 0;
    std::vector<std::string> series;
    std::vector<dcm_instance_match> found;
    try {
        DcmDataset keys;
        keys.putAndInsertString(DCM_QueryRetrieveLevel, "SERIES");
        keys.putAndInsertString(DCM_StudyInstanceUID, study_instance_uid);
        keys.putAndInsertString(DCM_SeriesInstanceUID, "");
        mitilog_status status = dcm_retrieve_find(
            association, &keys, "series of a study",
            [&series](DcmDataset *identifier, mitilog_error *) {
                OFString uid;
                if (identifier->findAndGetOFString(DCM_SeriesInstanceUID, uid).good() &&
                    !uid.empty())
                    series.push_back(uid.c_str());
                return MITILOG_OK;
            },
            error);
        for (size_t i = 0; status == MITILOG_OK && i < series.size(); i++) {
            DcmDataset image_keys;
            image_keys.putAndInsertString(DCM_QueryRetrieveLevel, "IMAGE");
            image_keys.putAndInsertString(DCM_StudyInstanceUID, study_instance_uid);
            image_keys.putAndInsertString(DCM_SeriesInstanceUID, series[i].c_str());
            image_keys.putAndInsertString(DCM_SOPInstanceUID, "");
            const std::string &series_uid = series[i];
            status = dcm_retrieve_find(
                association, &image_keys, "instances of a series",
                [&found, &series_uid](DcmDataset *identifier, mitilog_error *) {
                    OFString uid;
                    if (identifier->findAndGetOFString(DCM_SOPInstanceUID, uid).good() &&
                        !uid.empty()) {
                        dcm_instance_match match = {NULL, NULL};
                        found.push_back(match);
                        found.back().series_instance_uid = dcm_string_copy(series_uid.c_str());
                        found.back().sop_instance_uid = dcm_string_copy(uid.c_str());
                    }
                    return MITILOG_OK;
                },
                error);
        }
        if (status != MITILOG_OK) {
            for (dcm_instance_match &m : found) {
                free(m.series_instance_uid);
                free(m.sop_instance_uid);
            }
            return status;
        }
        dcm_instance_match *out = (dcm_instance_match *)calloc(found.size() + 1, sizeof *out);
        if (out == NULL)
            throw std::bad_alloc();
        if (!found.empty())
            memcpy(out, found.data(), found.size() * sizeof *out);
        *matches = out;
        *count = found.size();
        return MITILOG_OK;
    } catch (...) {
        for (dcm_instance_match &m : found) {
            free(m.series_instance_uid);
            free(m.sop_instance_uid);
        }
        return dcm_error_from_exception(error, MITILOG_ERROR_MEMORY, "C-FIND instances");
    }
}

extern "C" void dcm_instance_matches_free(dcm_instance_match *matches, size_t count)
{
    if (matches == NULL)
        return;
    for (size_t i = 0; i < count; i++) {
        free(matches[i].series_instance_uid);
        free(matches[i].sop_instance_uid);
    }
    free(matches);
}

/* The identifier of a retrieve: a study, or one instance of it. */
static void dcm_retrieve_keys(DcmDataset &keys, const char *study, const char *series,
                              const char *instance)
{
    bool one = series != NULL && instance != NULL;
    keys.putAndInsertString(DCM_QueryRetrieveLevel, one ? "IMAGE" : "STUDY");
    keys.putAndInsertString(DCM_StudyInstanceUID, study);
    if (one) {
        keys.putAndInsertString(DCM_SeriesInstanceUID, series);
        keys.putAndInsertString(DCM_SOPInstanceUID, instance);
    }
}

/* The final response's status and counts; *result zeroed first. */
static void dcm_retrieve_summarise(OFList<RetrieveResponse *> &responses, bool get,
                                   dcm_retrieve_result *result)
{
    result->status = 0xFFFF;
    result->completed = result->failed = result->warning = -1;
    result->status_text[0] = '\0';
    bool have_final = false;
    for (RetrieveResponse *response : responses) {
        if (!DICOM_PENDING_STATUS(response->m_status) || !have_final) {
            result->completed = response->m_numberOfCompletedSubops;
            result->failed = response->m_numberOfFailedSubops;
            result->warning = response->m_numberOfWarningSubops;
            result->status = response->m_status;
            if (!DICOM_PENDING_STATUS(response->m_status))
                have_final = true;
        }
        delete response;
    }
    if (!have_final)
        snprintf(result->status_text, sizeof result->status_text, "no final response");
    else
        snprintf(result->status_text, sizeof result->status_text, "%s",
                 get ? DU_cgetStatusString(result->status) : DU_cmoveStatusString(result->status));
}

extern "C" mitilog_status dcm_association_get(dcm_association *association,
                                              const char *study_instance_uid,
                                              const char *series_instance_uid,
                                              const char *sop_instance_uid,
                                              dcm_retrieve_result *result, mitilog_error *error)
{
    try {
        DcmDataset keys;
        dcm_retrieve_keys(keys, study_instance_uid, series_instance_uid, sop_instance_uid);
        OFList<RetrieveResponse *> responses;
        OFCondition condition =
            association->scu->sendCGETRequest(association->retrieve_context, &keys, &responses);
        dcm_retrieve_summarise(responses, true, result);
        if (condition.bad()) {
            char text[400];
            snprintf(text, sizeof text,
                     "the C-GET of study %s from the PACS %s failed (the association was lost "
                     "or timed out)",
                     study_instance_uid, association->peer);
            return dcm_error_from_condition(error, MITILOG_ERROR_IO, text, condition);
        }
        return MITILOG_OK;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_MEMORY, "C-GET")
}

extern "C" mitilog_status dcm_association_move(dcm_association *association,
                                               const char *destination_ae_title,
                                               const char *study_instance_uid,
                                               const char *series_instance_uid,
                                               const char *sop_instance_uid,
                                               dcm_retrieve_result *result, mitilog_error *error)
{
    try {
        DcmDataset keys;
        dcm_retrieve_keys(keys, study_instance_uid, series_instance_uid, sop_instance_uid);
        OFList<RetrieveResponse *> responses;
        OFCondition condition = association->scu->sendMOVERequest(
            association->retrieve_context, destination_ae_title, &keys, &responses);
        dcm_retrieve_summarise(responses, false, result);
        if (condition.bad()) {
            char text[400];
            snprintf(text, sizeof text,
                     "the C-MOVE of study %s from the PACS %s failed (the association was lost "
                     "or timed out)",
                     study_instance_uid, association->peer);
            return dcm_error_from_condition(error, MITILOG_ERROR_IO, text, condition);
        }
        return MITILOG_OK;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_MEMORY, "C-MOVE")
}

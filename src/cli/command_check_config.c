/* mitilog check-config [FILE] [--policy FILE]: validate the configuration,
 * the site rules and the ALARA policy it names (or the one given), report
 * every problem of each, print the effective configuration and the policy
 * version. */
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "backfill/backfill.h"
#include "cli/cli_options.h"
#include "cli/commands.h"
#include "config/config_site.h"
#include "http/http_auth.h"
#include "rules/rules.h"
#include "store/store_engine_postgresql.h"

/* The data folder as `serve` will use it: it exists and takes a new file,
 * or its first missing folder can be made under an existing one. Probed
 * by doing it (a folder or a file made and removed at once), since
 * permissions alone do not say it (root, read-only or virtual file
 * systems such as /proc). */
static int check_data_directory(const config *config)
{
    const char *path = config->data_directory;
    char probe[4096];
    struct stat information;
    if (stat(path, &information) == 0) {
        if (!S_ISDIR(information.st_mode)) {
            fprintf(stderr, "mitilog: [storage] data_directory %s is not a folder\n", path);
            return -1;
        }
        if (snprintf(probe, sizeof probe, "%s/.mitilog-check-XXXXXX", path) >= (int)sizeof probe)
            return -1;
        int descriptor = mkstemp(probe);
        if (descriptor < 0) {
            fprintf(stderr,
                    "mitilog: [storage] data_directory %s: serve could not write there (%s); "
                    "choose a folder this user may write\n",
                    path, strerror(errno));
            return -1;
        }
        close(descriptor);
        unlink(probe);
        return 0;
    }
    /* The first folder of the path that does not exist yet. */
    if (snprintf(probe, sizeof probe, "%s", path) >= (int)sizeof probe)
        return -1;
    for (char *cursor = probe + 1;; cursor++) {
        char saved = *cursor;
        if (saved != '/' && saved != '\0')
            continue;
        *cursor = '\0';
        if (stat(probe, &information) != 0) {
            if (mkdir(probe, 0750) != 0) {
                fprintf(stderr,
                        "mitilog: [storage] data_directory %s: serve could not create %s (%s); "
                        "choose a folder under one this user may write\n",
                        path, probe, strerror(errno));
                return -1;
            }
            rmdir(probe);
            return 0;
        }
        if (!S_ISDIR(information.st_mode)) {
            fprintf(stderr, "mitilog: [storage] data_directory %s: %s is not a folder\n", path,
                    probe);
            return -1;
        }
        *cursor = saved;
        if (saved == '\0')
            return 0;
    }
}

/* The site rules file ([site] rules): exam types, rooms, shifts, SR codes.
 * Kept loaded in rules for the policy's cross-check; 0 valid, -1 not. */
static int check_site(const char *path, const char *config_path, ext_site_rules *rules)
{
    mitilog_error error;
    if (config_site_load(path, rules, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog: [site] rules = %s (in %s):\n%s\n", path, config_path, error.text);
        return -1;
    }
    printf("\n; site rules %s: %zu exam types, %zu room names, %zu shifts, %zu SR codes\n",
           rules->source_path != NULL ? rules->source_path : "(none)", rules->exam_type_count,
           rules->room_count + rules->room_by_ae_count, rules->shift_count, rules->sr_code_count);
    return 0;
}

static int site_has_exam_type(const ext_site_rules *rules, const char *key, size_t length)
{
    for (size_t i = 0; i < rules->exam_type_count; i++)
        if (strlen(rules->exam_types[i].key) == length &&
            strncmp(rules->exam_types[i].key, key, length) == 0)
            return 1;
    return 0;
}

static void report_unknown_category(const char *policy_path, const char *rule, const char *key,
                                    const char *name, size_t length, const ext_site_rules *rules)
{
    fprintf(stderr,
            "mitilog: %s: [rule %s] %s: category '%.*s' is not an exam type of the site rules "
            "(%s); the exam types are",
            policy_path, rule, key, (int)length, name,
            rules->source_path != NULL ? rules->source_path : "none loaded");
    for (size_t i = 0; i < rules->exam_type_count; i++)
        fprintf(stderr, "%s %s", i ? "," : "", rules->exam_types[i].key);
    fprintf(stderr, "%s\n", rules->exam_type_count == 0 ? " none" : "");
}

/* Every category the policy names (KEY.category.NAME, applies/except
 * category:NAME) must be an exam type key of the site, or it never
 * applies. Returns the number of unknown ones. */
static int check_categories(const rules_policy *policy, const char *policy_path,
                            const ext_site_rules *rules)
{
    int unknown = 0;
    for (size_t i = 0; i < rules_policy_rule_count(policy); i++) {
        exam_rule_info info;
        if (rules_policy_rule_at(policy, i, &info) != 0)
            continue;
        for (size_t s = 0; s < info.setting_count; s++) {
            const char *key = info.settings[s].key;
            const char *selector = strstr(key, ".category.");
            if (selector != NULL) {
                const char *name = selector + strlen(".category.");
                if (!site_has_exam_type(rules, name, strlen(name))) {
                    report_unknown_category(policy_path, info.id, key, name, strlen(name), rules);
                    unknown++;
                }
            }
            if (strcmp(key, "applies") != 0 && strcmp(key, "except") != 0)
                continue;
            for (const char *item = strstr(info.settings[s].value, "category:"); item != NULL;
                 item = strstr(item + 1, "category:")) {
                const char *name = item + strlen("category:");
                size_t length = strcspn(name, ", ");
                if (!site_has_exam_type(rules, name, length)) {
                    report_unknown_category(policy_path, info.id, key, name, length, rules);
                    unknown++;
                }
            }
        }
    }
    return unknown;
}

/* What the HTTP side will be: scheme, login (the password file is read
 * and checked), limits. */
static int check_http(const config *config)
{
    int https = config->http_tls_certificate[0] != '\0';
    char login[600] = "no login";
    int status = 0;
    if (config->http_password_file[0] != '\0') {
        http_auth *auth = NULL;
        mitilog_error error;
        if (http_auth_load(config->http_password_file, &auth, &error) != MITILOG_OK) {
            fprintf(stderr, "mitilog: [http] password_file: %s\n", error.text);
            return -1;
        }
        snprintf(login, sizeof login, "login required (%zu users in %s)",
                 http_auth_user_count(auth), config->http_password_file);
        http_auth_free(auth);
    }
    char per_address[32] = "no limit";
    if (config->http_max_connections_per_address != 0)
        snprintf(per_address, sizeof per_address, "%u", config->http_max_connections_per_address);
    printf("\n; HTTP: %s://%s:%u/ %s, %s; at most %u connections, per address %s, "
           "%u s to send a request\n",
           https ? "https" : "http", config->http_address, config->http_port,
           https ? "(TLS 1.2 and 1.3, forward-secret AEAD ciphers, HSTS)" : "(plain HTTP)", login,
           config->http_max_connections, per_address, config->http_request_timeout_seconds);
    return status;
}

/* [backfill] source and window, as `mitilog backfill` will read them. */
static int check_backfill(const config *config)
{
    backfill_settings settings;
    memset(&settings, 0, sizeof settings);
    mitilog_error error;
    int status = 0;
    if (config->backfill_source[0] != '\0' &&
        backfill_parse_source(config->backfill_source, &settings, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog: [backfill] source: %s\n", error.text);
        status = -1;
    }
    if (backfill_parse_window(config->backfill_window, &settings, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog: [backfill] window: %s\n", error.text);
        status = -1;
    }
    return status;
}

/* from_config: the path came from [rules] policy of that file. */
static int check_policy(const char *path, const char *from_config, const ext_site_rules *rules)
{
    rules_policy *policy = NULL;
    mitilog_error error;
    if (rules_policy_load(path, &policy, &error) != MITILOG_OK) {
        if (from_config != NULL)
            fprintf(stderr, "mitilog: [rules] policy = %s (in %s):\n%s\n", path, from_config,
                    error.text);
        else
            fprintf(stderr, "mitilog: --policy %s:\n%s\n", path, error.text);
        return -1;
    }
    int status = 0;
    if (rules != NULL && check_categories(policy, path, rules) > 0)
        status = -1;
    printf("\n; policy %s: %zu rules, version %s\n", path, rules_policy_rule_count(policy),
           rules_policy_version(policy));
    rules_policy_free(policy);
    return status;
}

/* One PostgreSQL connection string of [storage]: does the server answer,
 * and which schema does it hold? 0 yes (and not newer than this program),
 * -1 no, said in plain words. */
static int check_postgresql(const char *key, const char *conninfo)
{
    int schema_version = -1;
    char server_version[32];
    mitilog_error error;
    if (store_engine_postgresql_ping(conninfo, &schema_version, server_version,
                                     sizeof server_version, &error) != MITILOG_OK) {
        fprintf(stderr,
                "mitilog: [storage] %s: %s\n"
                "  The database must exist and this user may need a password (~/.pgpass) or "
                "a line of the server's pg_hba.conf allowing this host.\n",
                key, error.text);
        return -1;
    }
    int latest = store_postgresql_latest_migration();
    if (schema_version < 0)
        printf("; storage: [storage] %s answers (PostgreSQL %s); no mitilog schema there yet: "
               "the first start of serve creates it (version %d)\n",
               key, server_version, latest);
    else
        printf("; storage: [storage] %s answers (PostgreSQL %s); schema version %d, this "
               "program's %d%s\n",
               key, server_version, schema_version, latest,
               schema_version < latest ? " (serve brings it up to date when it starts)" : "");
    if (schema_version > latest) {
        fprintf(stderr,
                "mitilog: [storage] %s: the database has schema version %d, newer than this "
                "program's %d: run the newer mitilog there\n",
                key, schema_version, latest);
        return -1;
    }
    return 0;
}

/* The store the configuration names: the SQLite file, or the PostgreSQL
 * server(s), asked whether they answer. */
static int check_storage(const config *config)
{
    if (strcmp(config->storage_engine, "postgresql") != 0) {
        printf("\n; storage: SQLite file %s\n", config->database_path);
        return 0;
    }
    printf("\n");
    int status = check_postgresql("connection", config->storage_connection);
    if (config->storage_read_connection[0] != '\0' &&
        check_postgresql("read_connection", config->storage_read_connection) != 0)
        status = -1;
    return status;
}

int command_check_config(int argc, char **argv)
{
    const char *config_path = NULL, *policy_path = NULL;
    int usage_error = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--policy") == 0 && i + 1 < argc)
            policy_path = argv[++i];
        else if (argv[i][0] != '-' && config_path == NULL)
            config_path = argv[i];
        else if (strcmp(argv[i], "--help") != 0 && strcmp(argv[i], "-h") != 0)
            usage_error = 1;
    }
    if (cli_wants_help(argc, argv) || usage_error || (config_path == NULL && policy_path == NULL)) {
        int help = cli_wants_help(argc, argv);
        fprintf(help ? stdout : stderr,
                "usage: mitilog check-config FILE [--policy POLICY]\n"
                "       mitilog check-config --policy POLICY\n"
                "Validates FILE, the site rules it names ([site] rules) and the ALARA policy\n"
                "([rules] policy, or POLICY when given), asks a PostgreSQL store whether\n"
                "it answers ([storage] engine = postgresql), and prints the effective\n"
                "configuration (defaults filled in, paths resolved) and the policy version.\n"
                "Every problem of every file is reported, each naming the file, line and\n"
                "key. Exit status 0 if valid, 2 if not.\n");
        return help ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    int status = EXIT_STATUS_SUCCESS;
    if (config_path == NULL)
        return check_policy(policy_path, NULL, NULL) != 0 ? EXIT_STATUS_USAGE : status;
    config config;
    mitilog_error error;
    mitilog_status loaded = config_load(config_path, &config, &error);
    if (loaded == MITILOG_ERROR_IO || loaded == MITILOG_ERROR_MEMORY) {
        fprintf(stderr, "mitilog: %s\n", error.text);
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    if (loaded != MITILOG_OK) {
        /* Go on with the values that were valid: the other files are
         * checked too, so that one run shows every problem. */
        fprintf(stderr, "mitilog: %s\n", error.text);
        status = EXIT_STATUS_USAGE;
    } else {
        config_print(&config, stdout);
    }
    if (check_data_directory(&config) != 0)
        status = EXIT_STATUS_USAGE;
    if (check_http(&config) != 0)
        status = EXIT_STATUS_USAGE;
    if (loaded == MITILOG_OK && check_storage(&config) != 0)
        status = EXIT_STATUS_USAGE;
    if (check_backfill(&config) != 0)
        status = EXIT_STATUS_USAGE;
    ext_site_rules rules;
    int site_valid = check_site(config.site_rules_path, config_path, &rules) == 0;
    if (!site_valid)
        status = EXIT_STATUS_USAGE;
    if (check_policy(policy_path != NULL ? policy_path : config.rules_policy_path,
                     policy_path != NULL ? NULL : config_path, site_valid ? &rules : NULL) != 0)
        status = EXIT_STATUS_USAGE;
    ext_site_rules_free(&rules);
    config_free(&config);
    return status;
}

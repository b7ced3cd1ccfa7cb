/* mitilog check-config [FILE] [--policy FILE]: validate the configuration
 * and the ALARA policy it names (or the one given), print the effective
 * configuration and the policy version. */
#include <stdio.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "config/config_site.h"
#include "http/http_auth.h"
#include "rules/rules.h"

/* The site rules file ([site] rules): exam types, rooms, shifts, SR codes. */
static int check_site(const char *path)
{
    ext_site_rules rules;
    mitilog_error error;
    int status = 0;
    if (config_site_load(path, &rules, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog: %s\n", error.text);
        status = -1;
    } else {
        printf("\n; site rules %s: %zu exam types, %zu room names, %zu shifts, %zu SR codes\n",
               rules.source_path, rules.exam_type_count,
               rules.room_count + rules.room_by_ae_count, rules.shift_count,
               rules.sr_code_count);
    }
    ext_site_rules_free(&rules);
    return status;
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
           https ? "(TLS 1.2 and 1.3, forward-secret AEAD ciphers, HSTS)" : "(plain HTTP)",
           login, config->http_max_connections, per_address,
           config->http_request_timeout_seconds);
    return status;
}

static int check_policy(const char *path)
{
    rules_policy *policy = NULL;
    mitilog_error error;
    if (rules_policy_load(path, &policy, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog: %s\n", error.text);
        return -1;
    }
    printf("\n; policy %s: %zu rules, version %s\n", path, rules_policy_rule_count(policy),
           rules_policy_version(policy));
    rules_policy_free(policy);
    return 0;
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
                "Validates FILE and the ALARA policy it names ([rules] policy), or POLICY\n"
                "when given, and prints the effective configuration (defaults filled in,\n"
                "paths resolved) and the policy version. Exit status 0 if valid, 2 if not;\n"
                "errors name the file, line and key.\n");
        return help ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    int status = EXIT_STATUS_SUCCESS;
    if (config_path != NULL) {
        config config;
        if (cli_load_config(config_path, &config) != 0) {
            config_free(&config);
            return EXIT_STATUS_USAGE;
        }
        config_print(&config, stdout);
        if (check_http(&config) != 0)
            status = EXIT_STATUS_USAGE;
        if (check_site(config.site_rules_path) != 0)
            status = EXIT_STATUS_USAGE;
        if (policy_path == NULL && check_policy(config.rules_policy_path) != 0)
            status = EXIT_STATUS_USAGE;
        config_free(&config);
    }
    if (policy_path != NULL && check_policy(policy_path) != 0)
        status = EXIT_STATUS_USAGE;
    return status;
}

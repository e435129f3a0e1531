;;; quarry.el --- Ask a running `quarry serve' for premises -*- lexical-binding: t; -*-

;; Usage: start `quarry serve INDEX_DIR' (or `quarry serve' for the demo library), load this
;; file, select the goal in the goals window or a proof buffer, and run
;; `M-x quarry-premises-for-region'.  The ranked premises appear in the *quarry* buffer.
;; It needs Emacs 27.1 or later (native JSON) and nothing outside Emacs.

;;; Code:

(require 'json)
(require 'url)
(require 'url-http)
(require 'subr-x)

(defgroup quarry nil
  "Premise ranking from a quarry server."
  :group 'tools)

(defcustom quarry-server-url "http://127.0.0.1:7341"
  "Base URL of the quarry server."
  :type 'string)

(defcustom quarry-token-file nil
  "File holding the server's bearer token, or nil when the server needs none."
  :type '(choice (const nil) file))

(defcustom quarry-limit 10
  "How many premises to ask for."
  :type 'integer)

(defconst quarry--project-markers '("_CoqProject" "lakefile.lean" "lakefile.toml")
  "Files that mark the root of a library, to name the current file as the index does.")

(defun quarry--token ()
  "The bearer token, read from `quarry-token-file', or nil."
  (when quarry-token-file
    (with-temp-buffer
      (insert-file-contents quarry-token-file)
      (string-trim (buffer-string)))))

(defun quarry--relative-file (file)
  "FILE relative to its library root (the folder holding a project marker), else FILE."
  (let ((root (seq-some (lambda (marker) (locate-dominating-file file marker))
                        quarry--project-markers)))
    (if root (file-relative-name file root) file)))

(defun quarry--post (path body)
  "POST BODY (an alist) as JSON to PATH on the server; return (STATUS . PARSED-JSON)."
  (let* ((url-request-method "POST")
         (token (quarry--token))
         (url-request-extra-headers
          (append '(("Content-Type" . "application/json"))
                  (when token `(("Authorization" . ,(concat "Bearer " token))))))
         (url-request-data (encode-coding-string (json-encode body) 'utf-8))
         (buffer (url-retrieve-synchronously (concat quarry-server-url path) t t 30)))
    (unless buffer
      (error "quarry: no answer from %s" quarry-server-url))
    (with-current-buffer buffer
      (unwind-protect
          (let ((status url-http-response-status))
            (goto-char url-http-end-of-headers)
            (cons status
                  (json-parse-string
                   (decode-coding-string
                    (buffer-substring-no-properties (point) (point-max)) 'utf-8)
                   :object-type 'alist :array-type 'list)))
        (kill-buffer buffer)))))

(defun quarry-rank (goal &optional file line)
  "Ask the server for premises for GOAL; FILE and LINE place the cursor.
Return the list of premises, each an alist with `name', `kind', `statement',
`file', `line' and `score'.  Signal an error carrying the server's code otherwise."
  (let* ((body `((goal . ,goal) (limit . ,quarry-limit)
                 ,@(when file `((file . ,(quarry--relative-file file))))
                 ,@(when (and file line) `((line . ,line)))))
         (answer (quarry--post "/v1/rank" body))
         (status (car answer))
         (json (cdr answer)))
    (if (eql status 200)
        (alist-get 'premises json)
      (let ((err (alist-get 'error json)))
        (error "quarry: %s (%s)" (alist-get 'message err) (alist-get 'code err))))))

(defun quarry--format-premise (premise)
  "One line of the *quarry* buffer for PREMISE."
  (format "%2d. %s  [%s]  %s:%s\n      %s\n"
          (alist-get 'rank premise) (alist-get 'name premise) (alist-get 'kind premise)
          (alist-get 'file premise) (alist-get 'line premise)
          (alist-get 'statement premise)))

(defun quarry-premises-for-region (begin end)
  "Show premises for the goal between BEGIN and END in the *quarry* buffer.
When the buffer visits a file, its name and the line of BEGIN tell the server
which premises are in scope there."
  (interactive "r")
  (let* ((goal (buffer-substring-no-properties begin end))
         (file (buffer-file-name))
         (line (line-number-at-pos begin))
         (premises (quarry-rank goal file line)))
    (with-current-buffer (get-buffer-create "*quarry*")
      (let ((inhibit-read-only t))
        (erase-buffer)
        (insert (format "Premises for: %s\n\n" (string-trim goal)))
        (if premises
            (mapc (lambda (p) (insert (quarry--format-premise p))) premises)
          (insert "(none)\n")))
      (goto-char (point-min))
      (special-mode))
    (display-buffer "*quarry*")
    premises))

(provide 'quarry)
;;; quarry.el ends here

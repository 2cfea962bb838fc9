/** An answer link's token (and an answer-link confirmation): 32 random bytes, base64url. */
export const TOKEN_SHAPE = /^[A-Za-z0-9_-]{43}$/;
